//! `flowsift audit` on synthetic catalogues whose derived columns were made, in this file,
//! with known conventions by the handbook formulas (not by flowsift's code), with a few rows
//! altered by hand. Each test checks that the audit names the convention and its parameter
//! and flags exactly the altered rows.

use std::path::Path;

use assert_cmd::Command;
use serde_json::Value;

const C: f64 = 299_792.458; // km/s, exact (SI definition of the metre).

/// cos θ between a source at Galactic (l, b) and an apex at (l0, b0), degrees (spherical
/// law of cosines).
fn cos_angle(l: f64, b: f64, l0: f64, b0: f64) -> f64 {
    let r = std::f64::consts::PI / 180.0;
    (b * r).sin() * (b0 * r).sin() + (b * r).cos() * (b0 * r).cos() * ((l - l0) * r).cos()
}

/// The exact frame change for an observer moving at speed v towards (l0, b0):
/// 1 + z_B = (1 + z_A) / [γ (1 − β cos θ)], θ measured from the direction the observer sees
/// (special-relativistic Doppler shift of a moving observer; the form in PHYSICS.md,
/// "Observer's motion").
fn exact_boost(z: f64, l: f64, b: f64, v: f64, l0: f64, b0: f64) -> f64 {
    let beta = v / C;
    let gamma = 1.0 / (1.0 - beta * beta).sqrt();
    (1.0 + z) / (gamma * (1.0 - beta * cos_angle(l, b, l0, b0))) - 1.0
}

/// Planck 2018 dipole: 369.82 km/s towards l = 264.021°, b = 48.253° (Planck Collaboration I
/// 2020, A&A 641, A1, Table 2).
const PLANCK2018: (f64, f64, f64) = (369.82, 264.021, 48.253);

/// COBE/FIRAS dipole: ΔT = 3.372 mK on T0 = 2.728 K towards l = 264.14°, b = 48.26°
/// (Fixsen et al. 1996, ApJ 473, 576), speed c ΔT/T0.
fn firas() -> (f64, f64, f64) {
    (C * 3.372e-3 / 2.728, 264.14, 48.26)
}

/// Comoving distance in flat ΛCDM, D_C = (c/H0) ∫₀ᶻ dz'/E(z'), E² = Ω_m (1+z)³ + 1 − Ω_m
/// (Hogg 1999, astro-ph/9905116, eqs. 14–15), by Simpson's rule on 2000 intervals.
fn comoving(z: f64, h0: f64, om: f64) -> f64 {
    let n = 2000;
    let h = z / n as f64;
    let f = |x: f64| 1.0 / (om * (1.0 + x).powi(3) + 1.0 - om).sqrt();
    let mut s = f(0.0) + f(z);
    for k in 1..n {
        s += f(k as f64 * h) * if k % 2 == 1 { 4.0 } else { 2.0 };
    }
    C / h0 * s * h / 3.0
}

/// A deterministic spread of sky positions (Galactic) and heliocentric redshifts.
fn sky(n: usize) -> Vec<(f64, f64, f64)> {
    (0..n)
        .map(|k| {
            let l = (k as f64 * 137.508) % 360.0;
            let b = (2.0 * ((k as f64 + 0.5) / n as f64) - 1.0)
                .asin()
                .to_degrees();
            let z = 0.004 + 0.096 * ((k * 37) % n) as f64 / n as f64;
            (l, b, z)
        })
        .collect()
}

fn write_csv(path: &Path, header: &str, rows: &[Vec<f64>]) {
    let mut s = String::from(header);
    s.push('\n');
    for r in rows {
        let cells: Vec<String> = r.iter().map(|v| format!("{v:.12e}")).collect();
        s.push_str(&cells.join(","));
        s.push('\n');
    }
    std::fs::write(path, s).unwrap();
}

fn audit_json(args: &[&str]) -> Value {
    let out = Command::cargo_bin("flowsift")
        .unwrap()
        .arg("audit")
        .args(args)
        .arg("--json")
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn column<'a>(report: &'a Value, name: &str) -> &'a Value {
    report["columns"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["column"] == name)
        .unwrap_or_else(|| panic!("{name} not audited: {report:#}"))
}

fn rows(v: &Value) -> Vec<u64> {
    v["unexplained_rows"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r.as_u64().unwrap())
        .collect()
}

/// Additive cz + v cos θ with the FIRAS dipole: the audit names legacy-additive and
/// cobe-firas, and exactly the three rows changed by hand (1-based row numbers 8, 34, 91).
#[test]
fn additive_boost_with_firas_dipole() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("additive.csv");
    let (v, l0, b0) = firas();
    let mut data: Vec<Vec<f64>> = sky(120)
        .into_iter()
        .map(|(l, b, z)| {
            let cz = C * z;
            // Additive: cz_cmb = cz_helio + v cos θ (the legacy correction, PHYSICS.md).
            vec![l, b, cz, cz + v * cos_angle(l, b, l0, b0)]
        })
        .collect();
    data[7][3] += 250.0;
    data[33][3] -= 400.0;
    data[90][3] += 120.0;
    write_csv(&path, "glon,glat,cz_helio,cz_cmb", &data);
    let out = dir.path().join("flagged.csv");
    let r = audit_json(&[
        path.to_str().unwrap(),
        "--sky-frame",
        "galactic",
        "-o",
        out.to_str().unwrap(),
    ]);
    let c = column(&r, "cz_cmb");
    assert_eq!(c["quantity"], "cz-cmb");
    assert_eq!(c["best"]["boost"], "legacy-additive", "{c:#}");
    assert_eq!(c["best"]["dipole"], "cobe-firas", "{c:#}");
    assert_eq!(rows(c), vec![8, 34, 91]);
    assert_eq!(c["n_unexplained"], 3);
    assert_eq!(c["n_rows"], 120);
    assert!(c["rms"].as_f64().unwrap() < 1e-3, "{c:#}");
    // The exact boost with the same dipole is worse by ≈ v·z (PHYSICS.md): tens of km/s at
    // z ≈ 0.1, so its rms is well above a km/s.
    let exact = c["candidates"]
        .as_array()
        .unwrap()
        .iter()
        .find(|k| k["choices"]["boost"] == "exact" && k["choices"]["dipole"] == "cobe-firas")
        .unwrap();
    assert!(exact["rms"].as_f64().unwrap() > 5.0, "{exact:#}");
    // The flagged copy: every row kept, the altered rows flagged, the rest ok.
    let text = std::fs::read_to_string(&out).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines.len(), 121);
    let header: Vec<&str> = lines[0].split(',').collect();
    let flag = header.iter().position(|h| *h == "audit_flag").unwrap();
    let resid = header.iter().position(|h| *h == "audit_cz_cmb").unwrap();
    for (k, line) in lines[1..].iter().enumerate() {
        let cells: Vec<&str> = line.split(',').collect();
        let expected = if [7, 33, 90].contains(&k) {
            "cz_cmb:unexplained"
        } else {
            "ok"
        };
        assert_eq!(cells[flag], expected, "row {}", k + 1);
        if k == 33 {
            let r: f64 = cells[resid].parse().unwrap();
            assert!((r + 400.0).abs() < 1e-6, "{r}");
        }
    }
}

/// The exact boost with Planck 2018 in a column the name does not give away (named with
/// --check): exact and planck2018 named, the fitted apex returns the Planck 2018 numbers,
/// the two altered rows are flagged.
#[test]
fn exact_boost_with_planck2018() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("exact.csv");
    let (v, l0, b0) = PLANCK2018;
    let mut data: Vec<Vec<f64>> = sky(150)
        .into_iter()
        .map(|(l, b, z)| vec![l, b, z, exact_boost(z, l, b, v, l0, b0)])
        .collect();
    data[12][3] += 0.002;
    data[55][3] -= 0.0015;
    write_csv(&path, "glon,glat,z_helio,zframe_pub", &data);
    let r = audit_json(&[
        path.to_str().unwrap(),
        "--sky-frame",
        "galactic",
        "--check",
        "zframe_pub:z-cmb",
    ]);
    let c = column(&r, "zframe_pub");
    assert_eq!(c["best"]["boost"], "exact", "{c:#}");
    assert_eq!(c["best"]["dipole"], "planck2018", "{c:#}");
    assert_eq!(rows(c), vec![13, 56]);
    // Planck 2013 (369.0 km/s towards 263.99°, 48.26°) differs by ≈ 0.8 km/s: its residuals
    // are larger.
    let p13 = c["candidates"]
        .as_array()
        .unwrap()
        .iter()
        .find(|k| k["choices"]["boost"] == "exact" && k["choices"]["dipole"] == "planck2013")
        .unwrap();
    assert!(p13["median_abs"].as_f64().unwrap() > 1e-7, "{p13:#}");
    let f = &c["fitted_apex"];
    assert!(
        (f["speed_km_s"].as_f64().unwrap() - v).abs() < 0.01,
        "{f:#}"
    );
    assert!((f["l_deg"].as_f64().unwrap() - l0).abs() < 0.001, "{f:#}");
    assert!((f["b_deg"].as_f64().unwrap() - b0).abs() < 0.001, "{f:#}");
}

/// v_pec = c z_cmb − H0 d with H0 = 75 (the low-redshift shortcut, PHYSICS.md "Redshifts"),
/// z_cmb by the exact Planck 2018 boost: the audit names the estimator, the frame and
/// H0 = 75, and the two altered rows.
#[test]
fn low_redshift_estimator_with_h0_75() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("lowz.csv");
    let (v, l0, b0) = PLANCK2018;
    let mut data: Vec<Vec<f64>> = sky(140)
        .into_iter()
        .enumerate()
        .map(|(k, (l, b, z))| {
            let z_cmb = exact_boost(z, l, b, v, l0, b0);
            // A distance near the Hubble-law one with a made-up scatter.
            let d = C * z / 72.0 * (1.0 + 0.15 * ((k as f64) * 1.7).sin());
            vec![l, b, z, d, C * z_cmb - 75.0 * d]
        })
        .collect();
    data[4][4] += 500.0;
    data[61][4] -= 350.0;
    write_csv(&path, "glon,glat,z_helio,dl,v_pec", &data);
    let r = audit_json(&[path.to_str().unwrap(), "--sky-frame", "galactic"]);
    let c = column(&r, "v_pec");
    assert_eq!(c["best"]["estimator"], "low-redshift", "{c:#}");
    assert_eq!(c["best"]["boost"], "exact", "{c:#}");
    assert_eq!(c["best"]["dipole"], "planck2018", "{c:#}");
    let h0 = c["best"]["h0"].as_f64().unwrap();
    assert!((h0 - 75.0).abs() < 1e-6, "{h0}");
    assert_eq!(rows(c), vec![5, 62]);
}

/// η = log10(D_C(z_cmb)/d) with d in h⁻¹ Mpc, D_C(z_cmb) in h⁻¹ Mpc (H0 = 100) and
/// Ω_m = 0.3 (Hogg 1999): the audit names mpc-over-h (reading d as Mpc is off by
/// log10(0.7) ≈ −0.155 dex) and the two altered rows.
#[test]
fn eta_with_distances_in_mpc_over_h() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("eta.csv");
    let (v, l0, b0) = PLANCK2018;
    let mut data: Vec<Vec<f64>> = sky(130)
        .into_iter()
        .enumerate()
        .map(|(k, (l, b, z))| {
            let z_cmb = exact_boost(z, l, b, v, l0, b0);
            let dc_cmb = comoving(z_cmb, 100.0, 0.3);
            let d = dc_cmb * (1.0 + 0.1 * ((k as f64) * 2.3).sin());
            vec![l, b, z, d, (dc_cmb / d).log10()]
        })
        .collect();
    data[20][4] += 0.05;
    data[100][4] -= 0.03;
    write_csv(&path, "glon,glat,z_helio,dc,eta", &data);
    let r = audit_json(&[
        path.to_str().unwrap(),
        "--sky-frame",
        "galactic",
        "--distance-column",
        "dc",
        "--distance-kind",
        "dc",
        "--h0",
        "70",
        "--omega-m",
        "0.3",
    ]);
    let c = column(&r, "eta");
    assert_eq!(c["best"]["length-unit"], "mpc-over-h", "{c:#}");
    assert_eq!(c["best"]["boost"], "exact", "{c:#}");
    assert_eq!(c["best"]["dipole"], "planck2018", "{c:#}");
    assert!(c["rms"].as_f64().unwrap() < 1e-6, "{c:#}");
    assert_eq!(rows(c), vec![21, 101]);
    let mpc = c["candidates"]
        .as_array()
        .unwrap()
        .iter()
        .find(|k| {
            k["choices"]["length-unit"] == "mpc"
                && k["choices"]["boost"] == "exact"
                && k["choices"]["dipole"] == "planck2018"
        })
        .unwrap();
    assert!(
        (mpc["median_abs"].as_f64().unwrap() - (1.0f64 / 0.7).log10()).abs() < 1e-3,
        "{mpc:#}"
    );
}

/// The human-readable table names the column and prints the caution.
#[test]
fn table_output_has_the_caution() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("t.csv");
    let (v, l0, b0) = PLANCK2018;
    let data: Vec<Vec<f64>> = sky(40)
        .into_iter()
        .map(|(l, b, z)| vec![l, b, z, exact_boost(z, l, b, v, l0, b0)])
        .collect();
    write_csv(&path, "glon,glat,z_helio,z_cmb", &data);
    let out = Command::cargo_bin("flowsift")
        .unwrap()
        .args(["audit", path.to_str().unwrap(), "--sky-frame", "galactic"])
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("z_cmb"), "{text}");
    assert!(text.contains("boost=exact dipole=planck2018"), "{text}");
    assert!(text.contains("evidence, not proof"), "{text}");
}

/// A --check of a missing column or an unknown quantity is an error naming it.
#[test]
fn bad_checks_are_named() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("t.csv");
    write_csv(&path, "glon,glat,z_helio", &[vec![10.0, 20.0, 0.01]]);
    for (check, words) in [
        ("nope:z-cmb", "no column 'nope'"),
        ("z_helio:velocity", "unknown quantity 'velocity'"),
    ] {
        let out = Command::cargo_bin("flowsift")
            .unwrap()
            .args([
                "audit",
                path.to_str().unwrap(),
                "--sky-frame",
                "galactic",
                "--check",
                check,
            ])
            .output()
            .unwrap();
        assert!(!out.status.success());
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(words), "{err}");
    }
}

/// v_pec by the composition law with the observed luminosity-distance convention and the
/// relativistic Doppler velocity (PHYSICS.md: 1 + z_pec = (1 + z_cmb)/(1 + z_cos),
/// v = c((1+z)² − 1)/((1+z)² + 1); D_L = (1 + z_helio) D_M(z_cos), μ = 5 log10(D_L/10 pc);
/// flat ΛCDM H0 = 70, Ω_m = 0.3, D_M = D_C, Hogg 1999): the audit names composition,
/// observed, relativistic-doppler and the Planck 2018 exact boost, and the altered row.
#[test]
fn composition_with_observed_convention() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("comp.csv");
    let (v, l0, b0) = PLANCK2018;
    let mut data: Vec<Vec<f64>> = sky(100)
        .into_iter()
        .enumerate()
        .map(|(k, (l, b, z))| {
            let z_cmb = exact_boost(z, l, b, v, l0, b0);
            // A made-up peculiar velocity of up to ±900 km/s, as a redshift factor.
            let z_cos = (1.0 + z_cmb) / (1.0 + 0.003 * ((k as f64) * 0.9).sin()) - 1.0;
            let d_l = (1.0 + z) * comoving(z_cos, 70.0, 0.3);
            let mu = 5.0 * (d_l * 1e5).log10();
            let s = ((1.0 + z_cmb) / (1.0 + z_cos)).powi(2);
            vec![l, b, z, mu, C * (s - 1.0) / (s + 1.0)]
        })
        .collect();
    data[42][4] += 300.0;
    write_csv(&path, "glon,glat,z_helio,mu,v_pec", &data);
    let r = audit_json(&[path.to_str().unwrap(), "--sky-frame", "galactic"]);
    let c = column(&r, "v_pec");
    assert_eq!(c["best"]["estimator"], "composition", "{c:#}");
    assert_eq!(c["best"]["dl-convention"], "observed", "{c:#}");
    assert_eq!(c["best"]["velocity"], "relativistic-doppler", "{c:#}");
    assert_eq!(c["best"]["boost"], "exact", "{c:#}");
    assert_eq!(c["best"]["dipole"], "planck2018", "{c:#}");
    assert!(c["rms"].as_f64().unwrap() < 0.05, "{c:#}");
    assert_eq!(rows(c), vec![43]);
}

/// A distance column in h⁻¹ Mpc made from μ with h = 0.73: D_L = 10^(μ/5 − 5) Mpc (the
/// definition of the distance modulus, μ = 5 log10(D_L/10 pc)) and D[h⁻¹ Mpc] = h·D[Mpc].
/// The audit names mpc-over-h with the implied H0 = 73 and the luminosity distance.
#[test]
fn distance_in_mpc_over_h_implies_h0() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("dist.csv");
    let mut data: Vec<Vec<f64>> = sky(90)
        .into_iter()
        .enumerate()
        .map(|(k, (l, b, z))| {
            let mu = 5.0 * (C * z / 70.0 * 1e5).log10() + 0.2 * ((k as f64) * 1.3).sin();
            vec![l, b, z, mu, 0.73 * 10f64.powf(mu / 5.0 - 5.0)]
        })
        .collect();
    data[30][4] *= 1.2;
    write_csv(&path, "glon,glat,z_helio,mu,dist_h", &data);
    let r = audit_json(&[
        path.to_str().unwrap(),
        "--sky-frame",
        "galactic",
        "--check",
        "dist_h:distance",
    ]);
    let c = column(&r, "dist_h");
    assert_eq!(c["best"]["length-unit"], "mpc-over-h", "{c:#}");
    assert_eq!(c["best"]["distance-kind"], "dl", "{c:#}");
    let h0 = c["best"]["h0"].as_f64().unwrap();
    assert!((h0 - 73.0).abs() < 1e-6, "{h0}");
    assert_eq!(rows(c), vec![31]);
}

/// Redshifts given in the CMB frame cannot be audited against themselves: the error says
/// so and names the column.
#[test]
fn a_redshift_in_another_frame_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("t.csv");
    write_csv(&path, "glon,glat,z_cmb", &[vec![10.0, 20.0, 0.01]]);
    let out = Command::cargo_bin("flowsift")
        .unwrap()
        .args([
            "audit",
            path.to_str().unwrap(),
            "--sky-frame",
            "galactic",
            "--z-column",
            "z_cmb",
            "--z-frame",
            "cmb",
        ])
        .output()
        .unwrap();
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("'z_cmb'") && err.contains("heliocentric"),
        "{err}"
    );
}

/// A Local-Group cz made additively with an apex flowsift does not build in (Yahil, Tammann
/// & Sandage 1977: 308 km/s towards l = 105°, b = −7°; reference from memory): without an
/// apex file the audit says the fitted apex and returns those numbers; with the apex file
/// that lists it, it names it.
#[test]
fn local_group_apex_fitted_or_named_from_an_apex_file() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("lg.csv");
    let (v, l0, b0) = (308.0, 105.0, -7.0);
    let mut data: Vec<Vec<f64>> = sky(160)
        .into_iter()
        .map(|(l, b, z)| {
            let cz = C * z;
            vec![l, b, cz, cz + v * cos_angle(l, b, l0, b0)]
        })
        .collect();
    data[9][3] += 200.0;
    write_csv(&path, "glon,glat,cz_helio,cz_lg", &data);
    let r = audit_json(&[path.to_str().unwrap(), "--sky-frame", "galactic"]);
    let c = column(&r, "cz_lg");
    assert_eq!(c["best"]["boost"], "legacy-additive", "{c:#}");
    assert_eq!(c["best"]["local-group"], "fitted", "{c:#}");
    let f = &c["fitted_apex"];
    assert!(
        (f["speed_km_s"].as_f64().unwrap() - v).abs() < 1e-3,
        "{f:#}"
    );
    assert!((f["l_deg"].as_f64().unwrap() - l0).abs() < 1e-4, "{f:#}");
    assert!((f["b_deg"].as_f64().unwrap() - b0).abs() < 1e-4, "{f:#}");
    assert_eq!(rows(c), vec![10]);
    let apices = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data/apices.example.toml");
    let r = audit_json(&[
        path.to_str().unwrap(),
        "--sky-frame",
        "galactic",
        "--apex-file",
        apices.to_str().unwrap(),
    ]);
    let c = column(&r, "cz_lg");
    assert_eq!(c["best"]["local-group"], "yahil1977", "{c:#}");
    assert_eq!(rows(c), vec![10]);
}
