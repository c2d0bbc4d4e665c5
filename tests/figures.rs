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
    // Six figures (with a bulk-flow result), each as PNG, SVG and its data table.
    assert_eq!(files.len(), 18, "{files:?}");
    for f in files.iter().filter(|f| f.extension().unwrap() != "csv") {
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
        "\nmodel\n",
        "388 of 400 rows used",
    ] {
        assert!(hubble.contains(label), "Hubble diagram lacks {label:?}");
    }
    assert!(hubble.contains("12 with a status other than ok"));
    let vd = svg("velocity_distance.svg");
    for label in [
        "\npec\n",
        "redshift distance D",
        "binned mean ± error",
        "outliers (10)",
    ] {
        assert!(
            vd.contains(label),
            "velocity-distance figure lacks {label:?}"
        );
    }
    let sky = svg("sky_galactic.svg");
    for label in [
        " (km s",
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
    assert_eq!(html.matches("src=\"data:image/png;base64,").count(), 6);
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
    // Five figures (no bulk-flow result: no bulk-flow figure), SVG and data table each.
    assert_eq!(files.len(), 10, "{files:?}");
    assert!(files
        .iter()
        .all(|f| f.extension().unwrap() == "svg" || f.to_string_lossy().ends_with(".data.csv")));
    let hubble = std::fs::read_to_string(named(&files, "hubble_diagram.svg")).unwrap();
    assert!(hubble.contains("comoving distance D") && hubble.contains("z_cmb"));
    let sky = std::fs::read_to_string(named(&files, "sky_supergalactic.svg")).unwrap();
    assert!(sky.contains("supergalactic longitude SGL (deg)"));
    assert!(sky.contains("bulk flow not marked"));
    // SVG figures are embedded inline when there is no PNG.
    let report = dir.path().join("sub").join("report.html");
    std::fs::create_dir_all(report.parent().unwrap()).unwrap();
    write_report(&table, Path::new("mock.csv"), &files, None, &report).unwrap();
    let html = std::fs::read_to_string(&report).unwrap();
    assert_eq!(html.matches("<svg").count(), 5);
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
    let pngs: Vec<&PathBuf> = files
        .iter()
        .filter(|f| f.extension().unwrap() == "png")
        .collect();
    assert_eq!(pngs.len(), 5);
    for f in pngs {
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
        assert_eq!(files.len(), 10, "{files:?}");
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
    assert_eq!(html.matches("data:image/png;base64,").count(), 6);
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
    // A figure that cannot be written (a folder stands in its place): one message naming
    // the file once, exit 1.
    let blocked = out.join("sky_galactic.png");
    std::fs::remove_file(&blocked).unwrap();
    std::fs::create_dir(&blocked).unwrap();
    let assert = Command::cargo_bin("flowsift")
        .unwrap()
        .args(["plot"])
        .arg(&input)
        .arg("--out-dir")
        .arg(&out)
        .assert()
        .failure()
        .code(1);
    let stderr = String::from_utf8_lossy(&assert.get_output().stderr).to_string();
    assert_eq!(
        stderr.matches(&blocked.display().to_string()).count(),
        1,
        "{stderr}"
    );
    std::fs::remove_dir(&blocked).unwrap();
    // Bad input: one message, exit 1.
    Command::cargo_bin("flowsift")
        .unwrap()
        .args(["plot", "no-such-file.csv", "--out-dir"])
        .arg(&out)
        .assert()
        .failure()
        .code(1);
}

// ---------------------------------------------------------------------------------------
// Figures of issue 15: redshift-distance velocities, the flow map, paper style, data tables,
// the run's column mapping and cosmology.

/// A CSV data table: header and rows of text fields (our tables have no quoted fields).
fn read_csv(path: &Path) -> (Vec<String>, Vec<Vec<String>>) {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let mut lines = text.lines();
    let header: Vec<String> = lines
        .next()
        .unwrap()
        .split(',')
        .map(str::to_string)
        .collect();
    let rows = lines
        .map(|l| l.split(',').map(str::to_string).collect::<Vec<_>>())
        .collect();
    (header, rows)
}

fn column(header: &[String], rows: &[Vec<String>], name: &str) -> Vec<f64> {
    let i = header
        .iter()
        .position(|h| h == name)
        .unwrap_or_else(|| panic!("no column {name} in {header:?}"));
    rows.iter()
        .map(|r| r[i].parse::<f64>().unwrap_or(f64::NAN))
        .collect()
}

/// Weighted least-squares line y = a + b x (Bevington & Robinson, "Data Reduction and Error
/// Analysis", eq. 6.12 and 6.21; from memory), written here independently of the library:
/// returns (b, σ_b).
fn slope(x: &[f64], y: &[f64], e: &[f64]) -> (f64, f64) {
    let (mut s, mut sx, mut sy, mut sxx, mut sxy) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for i in 0..x.len() {
        let w = 1.0 / (e[i] * e[i]);
        s += w;
        sx += w * x[i];
        sy += w * y[i];
        sxx += w * x[i] * x[i];
        sxy += w * x[i] * y[i];
    }
    let d = s * sxx - sx * sx;
    ((s * sxy - sx * sy) / d, (s / d).sqrt())
}

fn unit(l: f64, b: f64) -> [f64; 3] {
    let (l, b) = (l.to_radians(), b.to_radians());
    [b.cos() * l.cos(), b.cos() * l.sin(), b.sin()]
}

/// The demo survey through `flowsift demo`: its flow map's cells point at the injected flow,
/// and its velocities show no trend against redshift distance but the known one against the
/// inferred distance.
#[test]
fn demo_flow_map_and_velocity_trends_against_the_injected_truth() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("demo");
    Command::cargo_bin("flowsift")
        .unwrap()
        .args(["demo", "--out-dir"])
        .arg(&out)
        .assert()
        .success();
    let figs = out.join("figures");

    // Flow map: documented columns; the error-weighted monopole + dipole fit to the cells of
    // all depths (shell 0), by normal equations written here.
    let (h, rows) = read_csv(&figs.join("flow_map_galactic.data.csv"));
    for c in [
        "shell",
        "d_lo",
        "d_hi",
        "cell",
        "l",
        "b",
        "solid_angle_sr",
        "n",
        "eta_mean",
        "eta_mean_err",
        "v_mean",
        "v_mean_err",
    ] {
        assert!(h.iter().any(|x| x == c), "flow map table lacks {c}: {h:?}");
    }
    let shell = column(&h, &rows, "shell");
    let (l, b) = (column(&h, &rows, "l"), column(&h, &rows, "b"));
    let (v, e) = (column(&h, &rows, "v_mean"), column(&h, &rows, "v_mean_err"));
    let n = column(&h, &rows, "n");
    let mut a = nalgebra::Matrix4::<f64>::zeros();
    let mut r = nalgebra::Vector4::<f64>::zeros();
    let mut cells = 0;
    for i in 0..rows.len() {
        if shell[i] != 0.0 || n[i] < 1.0 || !(v[i].is_finite() && e[i] > 0.0) {
            continue;
        }
        cells += 1;
        let u = unit(l[i], b[i]);
        let f = nalgebra::Vector4::new(1.0, u[0], u[1], u[2]);
        a += f * f.transpose() / (e[i] * e[i]);
        r += f * (v[i] / (e[i] * e[i]));
    }
    assert!(cells >= 20, "{cells} cells with objects");
    let p = a.try_inverse().unwrap() * r;
    let fitted = [p[1], p[2], p[3]];
    // The truth: the demo's injected bulk flow (src/mock, MockSpec::demo_survey).
    let truth = flowsift::mock::MockSpec::demo_survey().bulk_flow;
    let dot: f64 = (0..3).map(|k| fitted[k] * truth[k]).sum();
    let norm = |x: [f64; 3]| (x[0] * x[0] + x[1] * x[1] + x[2] * x[2]).sqrt();
    let angle = (dot / (norm(fitted) * norm(truth))).acos().to_degrees();
    assert!(
        angle < 45.0,
        "dipole of the cells {fitted:?} is {angle:.1}° from the injected apex"
    );

    // Velocity against redshift distance: no trend (slope within 3σ of zero); against the
    // inferred distance the spurious negative trend (beyond 3σ).
    let bins = |name: &str| {
        let (h, rows) = read_csv(&figs.join(name));
        for c in [
            "distance",
            "d_lo",
            "d_hi",
            "d_mean",
            "n",
            "v_mean",
            "v_mean_err",
            "eta_mean",
            "eta_mean_err",
            "v_pec_mean",
            "v_pec_mean_err",
            "true_v_mean",
        ] {
            assert!(h.iter().any(|x| x == c), "{name} lacks {c}: {h:?}");
        }
        assert!(rows.len() >= 4, "{name}: {} bins", rows.len());
        slope(
            &column(&h, &rows, "d_mean"),
            &column(&h, &rows, "v_mean"),
            &column(&h, &rows, "v_mean_err"),
        )
    };
    let (s, se) = bins("velocity_distance.data.csv");
    assert!(
        s.abs() < 3.0 * se,
        "slope against redshift distance {s} ± {se}"
    );
    let (s, se) = bins("velocity_inferred_distance.data.csv");
    assert!(s < -3.0 * se, "slope against inferred distance {s} ± {se}");

    // The report links and shows the new figures.
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    for name in [
        "flow_map_galactic.png",
        "bulk_flow.png",
        "velocity_inferred_distance.png",
        "flow_map_galactic.data.csv",
    ] {
        assert!(html.contains(name), "report does not link {name}");
    }
}

/// The equal-area grid: every cell's solid angle, integrated numerically over its bounds
/// (∫∫ cos b db dl, midpoint rule), is the analytic 4π/N.
#[test]
fn sky_cells_have_equal_solid_angles() {
    use flowsift::report::sky_cells::SkyGrid;
    for zones in [2, 4, 6, 8, 11] {
        let g = SkyGrid::with_zones(zones);
        let expected = 4.0 * std::f64::consts::PI / g.len() as f64;
        let mut total = 0.0;
        for i in 0..g.len() {
            let c = g.bounds(i).unwrap();
            let steps = 4000;
            let (lo, hi) = (c.lat_lo.to_radians(), c.lat_hi.to_radians());
            let h = (hi - lo) / steps as f64;
            let integral: f64 = (0..steps)
                .map(|k| (lo + (k as f64 + 0.5) * h).cos() * h)
                .sum::<f64>()
                * c.lon_width.to_radians();
            assert!(
                (integral - expected).abs() < 1e-6 * expected,
                "{zones} zones, cell {i}: {integral} sr against 4π/N = {expected}"
            );
            assert!((g.cell_solid_angle() - expected).abs() < 1e-12);
            total += integral;
        }
        assert!((total - 4.0 * std::f64::consts::PI).abs() < 1e-6);
    }
    // Points of a Fibonacci lattice (equal area per point; Á. González 2010, Math. Geosci. 42,
    // 49) fall evenly into the cells.
    let g = SkyGrid::with_zones(6);
    let n = 200_000;
    let mut counts = vec![0usize; g.len()];
    let golden = (1.0 + 5f64.sqrt()) / 2.0;
    for i in 0..n {
        let lat = (2.0 * (i as f64 + 0.5) / n as f64 - 1.0)
            .asin()
            .to_degrees();
        let lon = (360.0 * i as f64 / golden).rem_euclid(360.0);
        counts[g.cell(lon, lat).unwrap()] += 1;
    }
    let mean = n as f64 / g.len() as f64;
    for (i, c) in counts.iter().enumerate() {
        assert!(
            (*c as f64 - mean).abs() < 0.02 * mean,
            "cell {i}: {c} points, {mean} expected"
        );
    }
}

/// Paper style: PDF, SVG and PNG of every figure at a journal column width, the caption in a
/// .txt beside them and none inside the image.
#[test]
fn paper_style_writes_pdf_svg_png_and_captions_outside_the_image() {
    use flowsift::report::{PaperColumn, Style};
    let table = mock_table(300, 5, true);
    let dir = tempfile::tempdir().unwrap();
    let options = PlotOptions {
        style: Style::Paper,
        format: ImageFormat::All,
        bulkflow: Some(bulk_flow_result()),
        ..PlotOptions::default()
    };
    let files = render_all(&table, &options, dir.path()).unwrap();
    for stem in [
        "hubble_diagram",
        "velocity_distance",
        "flow_map_galactic",
        "sky_galactic",
        "bulk_flow",
        "velocity_pulls",
    ] {
        let pdf = std::fs::read(named(&files, &format!("{stem}.pdf"))).unwrap();
        assert!(pdf.starts_with(b"%PDF-"), "{stem}.pdf is not a PDF");
        let svg = std::fs::read_to_string(named(&files, &format!("{stem}.svg"))).unwrap();
        assert!(svg.contains("pt\""), "{stem}.svg is not sized in points");
        let caption =
            std::fs::read_to_string(named(&files, &format!("{stem}.caption.txt"))).unwrap();
        assert!(caption.len() > 100, "{stem}: {caption}");
        // No title or caption text in the image.
        let title = caption.split(". ").next().unwrap();
        assert!(
            !svg.contains(title) && !svg.contains("rows used") && !svg.contains("Left out"),
            "{stem}.svg holds its title or caption"
        );
        let (w, _) = png_size(named(&files, &format!("{stem}.png")));
        // 300 dpi: 3.5 in (single column) = 1050 px, 7.1 in (double) = 2129 px.
        let expected = if stem.contains("sky") || stem.contains("flow_map") {
            (PaperColumn::Double.width_pt() * 300.0 / 72.0).round() as u32
        } else {
            1050
        };
        assert_eq!(w, expected, "{stem}.png");
        assert!(named(&files, &format!("{stem}.data.csv")).exists());
    }
    // The report carries the captions.
    let report = dir.path().join("report.html");
    write_report(&table, Path::new("mock.fits"), &files, None, &report).unwrap();
    let html = std::fs::read_to_string(&report).unwrap();
    assert!(html.contains("rows used"));
}

/// A record whose column mapping names DM as the distance modulus and whose cosmology has
/// H0 = 73: the Hubble diagram reads μ from DM and draws the model curve in that cosmology.
#[test]
fn hubble_diagram_follows_the_runs_mapping_and_cosmology() {
    use flowsift::settings::{CosmologyChoice, DistanceKind};
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("dm.csv");
    let mut table = mock_table(200, 0, true);
    table.frame.rename("mu", "DM".into()).unwrap();
    table.frame.rename("mu_err", "DM_err".into()).unwrap();
    let mut record = RunRecord::new(
        "velocities",
        "flowsift velocities (test)",
        "2026-12-01T00:00:00Z",
    );
    record.settings.columns.distance = Some("DM".into());
    record.settings.columns.distance_kind = Some(DistanceKind::Mu);
    record.settings.cosmology = CosmologyChoice {
        h0: Some(73.0),
        omega_m: Some(0.3),
        ..Default::default()
    };
    write_table(
        &input,
        &table,
        &record.to_provenance(),
        &WriteOptions::default(),
    )
    .unwrap();
    let run = flowsift::report::run_figure_settings(&input, None);
    assert_eq!(run.mu_column, Some(("DM".to_string(), None)));
    let options = PlotOptions {
        format: ImageFormat::Svg,
        ..PlotOptions::default().with_run(&run)
    };
    let files = render_all(&table, &options, dir.path()).unwrap();
    let svg = std::fs::read_to_string(named(&files, "hubble_diagram.svg")).unwrap();
    assert!(
        svg.contains("distance modulus μ (mag)"),
        "μ not found through the mapping"
    );
    assert!(svg.contains("DM"), "the caption names the column read as μ");
    assert!(!svg.contains("comoving distance D"));
    // The model curve: at small z, μ = 5 log10(D_L / 10 pc) with the luminosity-distance
    // expansion D_L = (cz/H0)[1 + (1 − q0) z/2 + O(z²)], q0 = Ω_m/2 − Ω_Λ (M. Visser 2004,
    // Class. Quantum Grav. 21, 2603, eq. 40).
    let (h, rows) = read_csv(named(&files, "hubble_diagram.data.csv"));
    let kind = h.iter().position(|c| c == "kind").unwrap();
    let model: Vec<Vec<String>> = rows.into_iter().filter(|r| r[kind] == "model").collect();
    let z = column(&h, &model, "z_cmb");
    let m = column(&h, &model, "model");
    let q0 = 0.3 / 2.0 - 0.7;
    let mu = |z: f64, h0: f64| {
        let dl = C * z / h0 * (1.0 + (1.0 - q0) * z / 2.0);
        5.0 * (dl * 1e6 / 10.0).log10()
    };
    assert!(z[0] < 0.01, "{}", z[0]);
    assert!(
        (m[0] - mu(z[0], 73.0)).abs() < 2e-3,
        "{} vs {}",
        m[0],
        mu(z[0], 73.0)
    );
    assert!((m[0] - mu(z[0], 70.0)).abs() > 0.05);
}
