//! `flowsift correct` on mocks drawn from a known velocity field: the true cosmological
//! redshift is recovered within the reported error for ≈ 68% of objects, and the scatter of
//! Hubble-diagram residuals drops by what the injected velocities predict.

use assert_cmd::Command;
use flowsift::catalogue::field_io::write_field_fits;
use flowsift::catalogue::{read_table, ReadOptions, Table};
use flowsift::physics::cosmology::{Cosmology, CosmologyParams, LengthUnit};
use flowsift::physics::field::{hubble_per_length, AnalyticField, FieldAxes, InfallCentre};
use flowsift::physics::power::growth_rate;
use polars::prelude::*;

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

#[test]
fn correct_recovers_cosmological_redshifts() {
    let dir = tempfile::tempdir().unwrap();
    let p = CosmologyParams::flat_lcdm(70.0, 0.3);
    let c = Cosmology::new(p).unwrap();
    // An invented scenario: a uniform flow plus linear infall onto one centre, supergalactic
    // axes, Mpc, sampled on a 50³ grid of 8 Mpc cells (±200 Mpc).
    let model = AnalyticField {
        bulk: [120.0, -80.0, 40.0],
        centres: vec![InfallCentre {
            name: "knot".into(),
            position: [40.0, 60.0, -20.0],
            delta0: 0.9,
            r_scale: 15.0,
        }],
        growth_rate: growth_rate(0.3, 0.7, 0.0),
        h0_km_s_per_length: hubble_per_length(&p, LengthUnit::Mpc),
        axes: FieldAxes::Supergalactic,
        length_unit: LengthUnit::Mpc,
    };
    let grid = model
        .sample([-196.0, -196.0, -196.0], 8.0, [50, 50, 50])
        .unwrap();
    let field = dir.path().join("field.fits");
    write_field_fits(&field, &grid).unwrap();
    let mock = dir.path().join("mock.parquet");
    run_ok(&[
        "mock",
        "-o",
        mock.to_str().unwrap(),
        "--n",
        "1500",
        "--seed",
        "3",
        "--z-max",
        "0.04",
        "--sigma-v",
        "150",
        "--mu-err",
        "0.1",
        "--z-err",
        "0",
        "--field",
        field.to_str().unwrap(),
    ]);
    let out = dir.path().join("corrected.parquet");
    run_ok(&[
        "correct",
        mock.to_str().unwrap(),
        "--field",
        field.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
        "--sigma-v",
        "150",
    ]);
    let t = read_table(&out, &ReadOptions::default()).unwrap();
    let z_true = f64s(&t, "true_z_cos");
    let z_model = f64s(&t, "z_cos_model");
    let z_err = f64s(&t, "z_cos_model_err");
    let z_cmb = f64s(&t, "true_z_cmb");
    let mu = f64s(&t, "mu");
    let (ra, dec, d_true) = (f64s(&t, "ra"), f64s(&t, "dec"), f64s(&t, "true_d_c"));
    let rot = flowsift::physics::sky::SkyRotations::default();
    let flags: Vec<String> = t
        .frame
        .column("field_flag")
        .unwrap()
        .str()
        .unwrap()
        .iter()
        .map(|s| s.unwrap().to_string())
        .collect();
    let (mut n, mut within) = (0, 0);
    let (mut before, mut after, mut predicted) = (vec![], vec![], vec![]);
    for i in 0..z_true.len() {
        if flags[i] != "ok" {
            continue;
        }
        n += 1;
        if (z_model[i] - z_true[i]).abs() <= z_err[i] {
            within += 1;
        }
        // Hubble residuals in μ (the observed convention; z_helio ≈ z_cmb here to first order
        // is irrelevant: the same factor enters both).
        let mu_at = |z: f64| c.distance_modulus(z).unwrap();
        before.push(mu[i] - mu_at(z_cmb[i]));
        after.push(mu[i] - mu_at(z_model[i]));
        // What the field alone did to this object: its radial velocity at the true position
        // (the grid, as the mock used), removed by exact composition.
        let n_sg = rot
            .icrs_to_supergalactic
            .apply(&flowsift::physics::sky::Direction::<flowsift::physics::sky::Icrs>::from_lon_lat_deg(ra[i], dec[i]).unwrap())
            .xyz();
        let pos = [
            n_sg[0] * d_true[i],
            n_sg[1] * d_true[i],
            n_sg[2] * d_true[i],
        ];
        let v = grid.velocity_at(pos).unwrap();
        let u = v[0] * n_sg[0] + v[1] * n_sg[1] + v[2] * n_sg[2];
        let zp = flowsift::physics::redshift::doppler_redshift(u)
            .unwrap()
            .value();
        let z_field_removed = (1.0 + z_cmb[i]) / (1.0 + zp) - 1.0;
        predicted.push(mu_at(z_cmb[i]) - mu_at(z_field_removed));
    }
    assert!(n > 1200, "{n} objects inside the grid");
    let f = within as f64 / n as f64;
    // Binomial 3σ band around 68.3% for n ≈ 1400: ±3.7%.
    assert!((0.62..=0.74).contains(&f), "coverage {f}");
    let var = |v: &[f64]| {
        let m = v.iter().sum::<f64>() / v.len() as f64;
        v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / v.len() as f64
    };
    // The drop in residual variance is what the field's velocities put into μ (the random
    // σ_v part cannot be predicted and stays): Var(before) − Var(after) ≈ Var(δμ_field), up
    // to the covariance of δμ_field with the distance and σ_v scatter (zero in expectation;
    // ≈ 2·sqrt(Var·Var_rest/N) in a sample of N ≈ 1400, a few per cent here).
    let drop = var(&before) - var(&after);
    let injected = var(&predicted);
    assert!(
        (drop / injected - 1.0).abs() < 0.2,
        "drop {drop} vs injected {injected}"
    );
    assert!(var(&after) < var(&before));
}

/// `correct --density`: a single density mode δ = A cos(k x) along SGX on a periodic box
/// gives, in linear theory (∇·v = −H0 f δ, curl-free; Peebles 1980), v_x = −(H0 f A/k) sin(k x).
/// An object towards +SGX gets that radial velocity at its self-consistent distance, to the
/// accuracy of trilinear interpolation (≈ (kΔ)²/8 relative).
#[test]
fn density_grid_gives_linear_theory_velocities() {
    let dir = tempfile::tempdir().unwrap();
    let (n, spacing, amp) = (32usize, 10.0, 0.3);
    let box_len = n as f64 * spacing;
    let k = std::f64::consts::TAU / box_len;
    let origin = -0.5 * (n as f64 - 1.0) * spacing;
    let mut csv = String::from("x,y,z,delta\n");
    for iz in 0..n {
        for iy in 0..n {
            for ix in 0..n {
                let x = origin + ix as f64 * spacing;
                let (y, z) = (origin + iy as f64 * spacing, origin + iz as f64 * spacing);
                csv.push_str(&format!("{x},{y},{z},{}\n", amp * (k * (x - origin)).cos()));
            }
        }
    }
    let density = dir.path().join("density.csv");
    std::fs::write(&density, csv).unwrap();
    // An object towards +SGX at cz ≈ 5000 km/s.
    let rot = flowsift::physics::sky::SkyRotations::default();
    let sg = flowsift::physics::sky::Direction::<flowsift::physics::sky::Supergalactic>::from_lon_lat_deg(0.0, 0.0).unwrap();
    let (ra, dec) = rot.icrs_to_supergalactic.inverse().apply(&sg).lon_lat_deg();
    let input = dir.path().join("one.csv");
    std::fs::write(&input, format!("ra,dec,z_helio\n{ra},{dec},0.0165\n")).unwrap();
    let out = dir.path().join("out.csv");
    run_ok(&[
        "correct",
        input.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
        "--density",
        density.to_str().unwrap(),
        "--density-boundary",
        "periodic",
        "--growth-rate",
        "0.5",
    ]);
    let t = read_table(&out, &ReadOptions::default()).unwrap();
    let r = f64s(&t, "field_distance")[0];
    let v = f64s(&t, "v_model")[0];
    let expected = -(70.0 * 0.5 * amp / k) * (k * (r - origin)).sin();
    assert!(
        (v - expected).abs() < 0.03 * expected.abs().max(100.0),
        "v_model {v} vs linear theory {expected} at r = {r}"
    );
    // Read as a galaxy density contrast with β = 0.5, the same grid gives v ∝ β with no
    // growth rate inside (v_x = −(H0 β A/k) sin(k x) for δ_g = A cos(k x); linear theory
    // with a linear bias, Strauss & Willick 1995, from memory): the same velocities as f = 0.5,
    // not f·β.
    let out_beta = dir.path().join("out_beta.csv");
    let base = [
        "correct",
        input.to_str().unwrap(),
        "--density",
        density.to_str().unwrap(),
        "--density-boundary",
        "periodic",
    ];
    let mut args = base.to_vec();
    args.extend(["-o", out_beta.to_str().unwrap(), "--beta", "0.5"]);
    run_ok(&args);
    let tb = read_table(&out_beta, &ReadOptions::default()).unwrap();
    assert!((f64s(&tb, "v_model")[0] - v).abs() < 1e-9 * v.abs().max(1.0));
    let x = dir.path().join("x.csv");
    let mut both = base.to_vec();
    both.extend([
        "-o",
        x.to_str().unwrap(),
        "--beta",
        "0.5",
        "--growth-rate",
        "0.5",
    ]);
    Command::cargo_bin("flowsift")
        .unwrap()
        .args(&both)
        .assert()
        .failure()
        .stderr(predicates::str::contains("two readings"));
}

/// `correct --density` with a FITS `DELTA` image and the default isolated boundary: a
/// uniform sphere (δ0 inside radius R, zero elsewhere) centred at SGX = +60 Mpc pulls an
/// object behind it, towards +SGX, with the linear-theory velocity
/// v = −(H0 f/4π) M/|r − c|² (M = Σ δ h³ of the sphere's cells; Peebles 1980 §14, Gauss's
/// theorem for ∇·v = −H0 f δ), here towards the sphere, i.e. towards us. The run says which
/// boundary was assumed.
#[test]
fn density_image_with_isolated_boundary() {
    use fitsio::images::{ImageDescription, ImageType};
    let dir = tempfile::tempdir().unwrap();
    let (n, h, delta0, radius, centre) = (41usize, 5.0, 0.5, 15.0, 60.0);
    let origin = -0.5 * (n as f64 - 1.0) * h; // cell centres at −100 … 100 Mpc
    let mut delta = vec![0.0; n * n * n];
    let mut cells = 0usize;
    for k in 0..n {
        for j in 0..n {
            for i in 0..n {
                let p = [i, j, k].map(|m| origin + m as f64 * h);
                let d2 = (p[0] - centre).powi(2) + p[1] * p[1] + p[2] * p[2];
                if d2 < radius * radius {
                    delta[i + n * (j + n * k)] = delta0;
                    cells += 1;
                }
            }
        }
    }
    let mass = delta0 * cells as f64 * h.powi(3);
    let density = dir.path().join("delta.fits");
    {
        let mut f = fitsio::FitsFile::create(&density).open().unwrap();
        let description = ImageDescription {
            data_type: ImageType::Double,
            dimensions: &[n, n, n],
        };
        let hdu = f.create_image("DELTA", &description).unwrap();
        for (key, value) in [("FS_AXES", "SUPERGALACTIC"), ("FS_LUNIT", "Mpc")] {
            hdu.write_key(&mut f, key, value).unwrap();
        }
        for (key, value) in [
            ("FS_ORIG1", origin),
            ("FS_ORIG2", origin),
            ("FS_ORIG3", origin),
            ("FS_SPACE", h), // the card's former name, still read
        ] {
            hdu.write_key(&mut f, key, value).unwrap();
        }
        hdu.write_image(&mut f, &delta).unwrap();
    }
    let rot = flowsift::physics::sky::SkyRotations::default();
    let sg = flowsift::physics::sky::Direction::<flowsift::physics::sky::Supergalactic>::from_lon_lat_deg(0.0, 0.0).unwrap();
    let (ra, dec) = rot.icrs_to_supergalactic.inverse().apply(&sg).lon_lat_deg();
    let input = dir.path().join("one.csv");
    // Behind the sphere: cz ≈ 6600 km/s, D_C ≈ 93 Mpc.
    std::fs::write(&input, format!("ra,dec,z_helio\n{ra},{dec},0.0222\n")).unwrap();
    let out = dir.path().join("out.csv");
    let stdout = run_ok(&[
        "correct",
        input.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
        "--density",
        density.to_str().unwrap(),
        "--growth-rate",
        "0.5",
    ]);
    assert!(stdout.contains("δ = 0 outside the grid"), "{stdout}");
    let t = read_table(&out, &ReadOptions::default()).unwrap();
    let r = f64s(&t, "field_distance")[0];
    let v = f64s(&t, "v_model")[0];
    assert!(r > centre + radius + 2.0 * h && r < 100.0 - h, "r = {r}");
    let expected = -70.0 * 0.5 * mass / (4.0 * std::f64::consts::PI * (r - centre).powi(2));
    assert!(
        (v - expected).abs() < 0.03 * expected.abs(),
        "v_model {v} vs linear theory {expected} at r = {r}"
    );

    // A unit on the image is refused, naming the HDU and the card.
    let bad = dir.path().join("bad.fits");
    {
        let mut f = fitsio::FitsFile::create(&bad).open().unwrap();
        let description = ImageDescription {
            data_type: ImageType::Double,
            dimensions: &[2, 2, 2],
        };
        let hdu = f.create_image("DELTA", &description).unwrap();
        for (key, value) in [
            ("FS_AXES", "SUPERGALACTIC"),
            ("FS_LUNIT", "Mpc"),
            ("BUNIT", "km/s"),
        ] {
            hdu.write_key(&mut f, key, value).unwrap();
        }
        for key in ["FS_ORIG1", "FS_ORIG2", "FS_ORIG3", "FS_SPACE"] {
            hdu.write_key(&mut f, key, 1.0).unwrap();
        }
        hdu.write_image(&mut f, &[0.0; 8]).unwrap();
    }
    let failed = Command::cargo_bin("flowsift")
        .unwrap()
        .args([
            "correct",
            input.to_str().unwrap(),
            "-o",
            dir.path().join("o2.csv").to_str().unwrap(),
            "--density",
            bad.to_str().unwrap(),
        ])
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&failed.stderr);
    assert!(!failed.status.success());
    assert!(
        err.contains("bad.fits") && err.contains("HDU DELTA") && err.contains("BUNIT"),
        "{err}"
    );
}

/// The vector flags take `X,Y,Z` in one argument, negative components included, as the
/// README writes them; anything else is refused with the expected form.
#[test]
fn vector_flags_take_comma_separated_triples() {
    let dir = tempfile::tempdir().unwrap();
    let mock = dir.path().join("mock.csv");
    run_ok(&[
        "mock",
        "-o",
        mock.to_str().unwrap(),
        "--n",
        "40",
        "--seed",
        "3",
        "--uniform-flow",
        "-100,50,20",
    ]);
    let field = dir.path().join("field.fits");
    run_ok(&[
        "field",
        "-o",
        field.to_str().unwrap(),
        "--uniform-flow",
        "150,-200,80",
        "--cells",
        "8",
        "--spacing",
        "40",
    ]);
    let out = dir.path().join("out.csv");
    run_ok(&[
        "correct",
        mock.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
        "--uniform-flow",
        "-150,200,-80",
        "--external",
        "-10,20,30",
    ]);
    let t = read_table(&out, &ReadOptions::default()).unwrap();
    assert_eq!(t.frame.height(), 40);
    for bad in ["1,2", "1,2,x", "1,2,3,4"] {
        let o = Command::cargo_bin("flowsift")
            .unwrap()
            .args([
                "correct",
                mock.to_str().unwrap(),
                "-o",
                dir.path().join("bad.csv").to_str().unwrap(),
                "--uniform-flow",
                bad,
            ])
            .output()
            .unwrap();
        assert!(!o.status.success());
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(err.contains("--uniform-flow") && err.contains(bad), "{err}");
    }
}
