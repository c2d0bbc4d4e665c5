//! Physics at the edges, each against an outside reference named beside the check.

use assert_cmd::Command;
use flowsift::catalogue::{read_table, ReadOptions};
use polars::prelude::*;

fn flowsift() -> Command {
    Command::cargo_bin("flowsift").unwrap()
}

/// Columns `z` and `column` of the flat ΛCDM (H0 = 70, Ω_m = 0.3) rows of the astropy
/// fixture `tests/reference/distances.csv` (astropy 8.0.2, `make_fixtures.py`).
fn flat_lcdm_fixture(column: &str) -> Vec<(f64, f64)> {
    let text = std::fs::read_to_string(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/distances.csv"),
    )
    .unwrap();
    let header: Vec<&str> = text
        .lines()
        .find(|l| l.starts_with("model,"))
        .unwrap()
        .split(',')
        .collect();
    let col = |n: &str| header.iter().position(|h| *h == n).unwrap();
    text.lines()
        .filter(|l| l.starts_with("flat_lcdm,70,0.29999999999999999,"))
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (
                f[col("z")].parse().unwrap(),
                f[col(column)].parse().unwrap(),
            )
        })
        .collect()
}

/// The heliocentric redshift of an object at rest in the CMB frame at redshift z, in the
/// direction (ra, dec), by the exact inverse boost with the Planck 2018 dipole.
fn heliocentric_at_rest(z: f64, ra: f64, dec: f64) -> f64 {
    use flowsift::physics::redshift::{Cmb, Redshift};
    use flowsift::physics::restframe::{default_apex, Boost};
    use flowsift::physics::sky::{Direction, Icrs, SkyRotations};
    let boost = Boost::<Cmb>::new(&default_apex("cmb")).unwrap();
    let gal = SkyRotations::default()
        .icrs_to_galactic
        .apply(&Direction::<Icrs>::from_lon_lat_deg(ra, dec).unwrap());
    boost
        .to_heliocentric(Redshift::<Cmb>::new(z).unwrap(), &gal)
        .value()
}

/// Write `csv` to `NAME.csv` in `dir`, run `flowsift COMMAND` on it with `extra` flags, and
/// return the output path (`NAME_out.csv`); the run must succeed.
fn run_on(
    dir: &std::path::Path,
    command: &str,
    name: &str,
    csv: &str,
    extra: &[&str],
) -> std::path::PathBuf {
    let input = dir.join(format!("{name}.csv"));
    std::fs::write(&input, csv).unwrap();
    let out = dir.join(format!("{name}_out.csv"));
    flowsift()
        .args([
            command,
            input.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ])
        .args(extra)
        .assert()
        .success();
    out
}

fn f64s(path: &std::path::Path, name: &str) -> Vec<f64> {
    let t = read_table(path, &ReadOptions::default()).unwrap();
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

/// The homogeneous Malmquist shift of η is −3Δ²/ln 10 with Δ = σ_lnd = ln 10 · σ_η: the
/// posterior mean of ln r, E[ln r|d] = ln d + 3Δ² (Lynden-Bell et al. 1988, ApJ 326, 19, the
/// derivation taken in ln r; the closed form is written out in `physics/malmquist.rs`), and
/// not the −3.5Δ²/ln 10 of E[r|d]. Checked to 1%.
#[test]
fn malmquist_shift_of_eta_is_the_log_space_mean() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("ra,dec,z_helio,eta,eta_err\n");
    for (i, e) in [0.02, 0.05, 0.087, 0.12].iter().enumerate() {
        text.push_str(&format!(
            "{},{},{},0.01,{e}\n",
            30.0 + 40.0 * i as f64,
            10.0,
            0.03
        ));
    }
    let out = run_on(dir.path(), "malmquist", "eta", &text, &[]);
    let eta = f64s(&out, "eta_input");
    let corrected = f64s(&out, "distance_malmquist");
    let ln10 = std::f64::consts::LN_10;
    for (i, e) in [0.02, 0.05, 0.087, 0.12].iter().enumerate() {
        let delta = ln10 * e;
        let want = -3.0 * delta * delta / ln10;
        let got = corrected[i] - eta[i];
        assert!(
            (got / want - 1.0).abs() < 0.01,
            "σ_η = {e}: {got} vs {want}"
        );
    }
}

/// Monte Carlo carries the intrinsic scatter σ_*: with a distance error too small to matter,
/// the 16–84% half-width of the draws equals the first-order v_pec_err (√(σ_v² + σ_*²)),
/// since for a Gaussian the 15.87th and 84.13th percentiles lie at ∓1σ (standard normal
/// quantiles, Φ(±1); any statistics handbook). 4000 draws: agreement to 5%.
#[test]
fn monte_carlo_draws_the_intrinsic_scatter() {
    let dir = tempfile::tempdir().unwrap();
    let out = run_on(
        dir.path(),
        "velocities",
        "one",
        "ra,dec,z_helio,mu,mu_err\n150,20,0.03,35.55,0.001\n210,-30,0.05,36.7,0.001\n",
        &[
            "--sigma-star",
            "300",
            "--monte-carlo",
            "4000",
            "--seed",
            "11",
        ],
    );
    let err = f64s(&out, "v_pec_err");
    let (lo, hi) = (f64s(&out, "v_pec_mc_p16"), f64s(&out, "v_pec_mc_p84"));
    for i in 0..2 {
        let half = 0.5 * (hi[i] - lo[i]);
        assert!(err[i] > 299.0 && err[i] < 320.0, "first order {}", err[i]);
        assert!(
            (half / err[i] - 1.0).abs() < 0.05,
            "MC {half} vs first order {}",
            err[i]
        );
    }
}

/// A galaxy at rest in the CMB frame beyond the maximum of D_A (z ≈ 1.6 for Ω_m = 0.3) gets
/// v_pec ≈ 0 under every convention: the `full` inversion goes through D_A, which has two
/// roots there, and the one consistent with the observed redshift is taken. D_M at these
/// redshifts is astropy's (fixture `distances.csv`, flat ΛCDM H0 = 70, Ω_m = 0.3, astropy
/// 8.0.2); at rest 1 + z_cmb = 1 + z_cos, so D_L = (1 + z_helio) D_M(z_cos) in the observed
/// and full conventions and (1 + z_cos) D_M(z_cos) in the cosmological one.
#[test]
fn galaxies_at_rest_beyond_the_angular_diameter_maximum() {
    let rows: Vec<(f64, f64)> = flat_lcdm_fixture("d_m")
        .into_iter()
        .filter(|(z, _)| *z > 1.7)
        .collect();
    assert!(rows.len() >= 3, "fixture rows at z > 1.7: {rows:?}");
    let (ra, dec) = (150.0, 20.0);
    let dir = tempfile::tempdir().unwrap();
    for convention in ["observed", "cosmological", "full"] {
        let mut csv = String::from("ra,dec,z_helio,mu\n");
        for (z, d_m) in &rows {
            let z_helio = heliocentric_at_rest(*z, ra, dec);
            let d_l = match convention {
                "cosmological" => (1.0 + z) * d_m,
                _ => (1.0 + z_helio) * d_m,
            };
            csv.push_str(&format!(
                "{ra},{dec},{z_helio},{}\n",
                5.0 * d_l.log10() + 25.0
            ));
        }
        let out = run_on(
            dir.path(),
            "velocities",
            convention,
            &csv,
            &["--dl-convention", convention],
        );
        for (i, v) in f64s(&out, "v_pec").iter().enumerate() {
            assert!(
                v.abs() < 1.0,
                "{convention}, z = {}: v_pec = {v} km/s",
                rows[i].0
            );
        }
    }
}

/// Angular-diameter distances as input (`--distance-kind da`, column `da`): a galaxy at
/// rest whose D_A is astropy's D_A(z) (fixture `distances.csv`, flat ΛCDM H0 = 70,
/// Ω_m = 0.3, astropy 8.0.2) gets v_pec ≈ 0 in the cosmological convention, on both sides of
/// the D_A maximum; in the observed and full conventions, where the observer's redshift
/// enters by Etherington's reciprocity D_L = (1 + z_obs)² D_A (Etherington 1933), at rest
/// D_A = D_M(z)/(1 + z_helio) = d_a (1 + z)/(1 + z_helio).
#[test]
fn angular_diameter_distances_at_rest() {
    let rows: Vec<(f64, f64)> = flat_lcdm_fixture("d_a")
        .into_iter()
        .filter(|(z, _)| *z >= 0.01)
        .collect();
    let (ra, dec) = (40.0, -35.0);
    let dir = tempfile::tempdir().unwrap();
    for convention in ["cosmological", "observed", "full"] {
        let mut csv = String::from("ra,dec,z_helio,da\n");
        for (z, d_a) in &rows {
            let z_helio = heliocentric_at_rest(*z, ra, dec);
            let da = match convention {
                "cosmological" => *d_a,
                _ => d_a * (1.0 + z) / (1.0 + z_helio),
            };
            csv.push_str(&format!("{ra},{dec},{z_helio},{da}\n"));
        }
        let out = run_on(
            dir.path(),
            "velocities",
            convention,
            &csv,
            &["--dl-convention", convention],
        );
        let z_cos = f64s(&out, "z_cos");
        for (i, v) in f64s(&out, "v_pec").iter().enumerate() {
            assert!(
                v.abs() < 1.0,
                "{convention}, z = {}: v_pec = {v} km/s",
                rows[i].0
            );
            assert!((z_cos[i] - rows[i].0).abs() < 1e-8 * (1.0 + rows[i].0));
        }
    }
}

/// A D_A input and the D_L that Etherington's reciprocity makes of it, D_L = (1 + z_helio)²
/// D_A (Etherington 1933), give the same velocity and error in the observed and full
/// conventions.
#[test]
fn angular_diameter_and_luminosity_inputs_agree_by_reciprocity() {
    let zh: f64 = 0.042;
    let (da, da_err) = (165.0, 20.0);
    let k = (1.0 + zh) * (1.0 + zh);
    let run = |args: &[String]| -> serde_json::Value {
        let out = flowsift().args(args).assert().success();
        serde_json::from_slice(&out.get_output().stdout).unwrap()
    };
    for convention in ["observed", "full"] {
        let base = |extra: [String; 4]| {
            let mut a: Vec<String> = [
                "galaxy",
                "--ra",
                "200",
                "--dec",
                "10",
                "--z-helio",
                "0.042",
                "--json",
                "--dl-convention",
                convention,
            ]
            .iter()
            .map(|s| s.to_string())
            .collect();
            a.extend(extra);
            a
        };
        let a = run(&base([
            "--da".into(),
            da.to_string(),
            "--da-err".into(),
            da_err.to_string(),
        ]));
        let b = run(&base([
            "--dl".into(),
            (k * da).to_string(),
            "--dl-err".into(),
            (k * da_err).to_string(),
        ]));
        for key in ["v_pec", "v_pec_err", "z_cos"] {
            let (x, y) = (a[key].as_f64().unwrap(), b[key].as_f64().unwrap());
            assert!(
                (x - y).abs() < 1e-9 * (1.0 + y.abs()),
                "{convention} {key}: {x} vs {y}"
            );
        }
    }
}

/// The ΛCDM expectation of a bulk flow keeps the physical baryon density of Planck 2018,
/// Ω_b h² = 0.02242 (Planck Collaboration VI 2020, Table 2), fixed when h changes: at
/// H0 = 70, Ω_b = 0.02242/0.49 = 0.045755 (arithmetic), not Planck's Ω_b = 0.0490 at h = 0.6766.
#[test]
fn lcdm_expectation_keeps_the_physical_baryon_density() {
    let dir = tempfile::tempdir().unwrap();
    let data =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data/lantern_survey.csv");
    let out = dir.path().join("v.fits");
    let assert = flowsift()
        .args([
            "velocities",
            data.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "--bulk-flow",
            "--json",
        ])
        .assert()
        .success();
    let summary: serde_json::Value = serde_json::from_slice(&assert.get_output().stdout).unwrap();
    let spectrum = summary["bulk_flow"][0]["lcdm"]["power_spectrum"]
        .as_str()
        .unwrap()
        .to_string();
    assert!(spectrum.contains("Ω_b = 0.045755"), "{spectrum}");
}

/// A distance modulus that reads as a number but names no distance (μ = ±1e20) has no
/// cosmological solution; it is not an unparseable value.
#[test]
fn absurd_moduli_have_no_cosmological_solution() {
    let dir = tempfile::tempdir().unwrap();
    let out = run_on(
        dir.path(),
        "velocities",
        "m",
        "ra,dec,z_helio,mu\n10,10,0.02,1e20\n10,10,0.02,-1e20\n10,10,0.02,34\n",
        &[],
    );
    let text = std::fs::read_to_string(&out).unwrap();
    let status: Vec<&str> = text
        .lines()
        .skip(1)
        .map(|l| l.rsplit(',').next().unwrap())
        .collect();
    assert_eq!(
        status,
        ["no_cosmological_solution", "no_cosmological_solution", "ok"]
    );
}

/// Counts from the user have stated limits, checked before any work (no abort on a huge
/// allocation): Monte Carlo draws per object at most 10⁶.
#[test]
fn huge_monte_carlo_counts_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let data =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data/lantern_survey.csv");
    for n in ["100000000000", "18446744073709551615"] {
        let out = flowsift()
            .args([
                "velocities",
                data.to_str().unwrap(),
                "-o",
                dir.path().join("o.csv").to_str().unwrap(),
                "--monte-carlo",
                n,
            ])
            .assert()
            .failure();
        let err = String::from_utf8_lossy(&out.get_output().stderr).to_string();
        assert!(err.contains("more than the 1000000"), "{err}");
    }
}

/// `v_rec` is the recession velocity today, H0·D_C(z_cos): for galaxies at rest given the
/// distance modulus of astropy's D_L(z) (fixture `distances.csv`, flat ΛCDM H0 = 70,
/// Ω_m = 0.3, astropy 8.0.2; cosmological convention, in which at rest z_cos = z), v_rec is
/// 70 km/s/Mpc × astropy's D_C(z), beyond c where D_C > c/H0 (z > 1.46), while v_pec ≈ 0. Its
/// error is c·σ(z_cos)/E(z_cos), with astropy's E(z) from the same fixture.
#[test]
fn recession_velocity_is_h0_times_the_comoving_distance() {
    let d_c = flat_lcdm_fixture("d_c");
    let d_l = flat_lcdm_fixture("d_l");
    let e = flat_lcdm_fixture("hubble_e");
    let (ra, dec) = (40.0, -30.0);
    let mut csv = String::from("ra,dec,z_helio,mu,mu_err\n");
    for (z, dl) in &d_l {
        let z_helio = heliocentric_at_rest(*z, ra, dec);
        csv.push_str(&format!(
            "{ra},{dec},{z_helio},{},0.1\n",
            5.0 * dl.log10() + 25.0
        ));
    }
    let dir = tempfile::tempdir().unwrap();
    let out = run_on(
        dir.path(),
        "velocities",
        "recession",
        &csv,
        &["--dl-convention", "cosmological"],
    );
    let v_rec = f64s(&out, "v_rec");
    let v_rec_err = f64s(&out, "v_rec_err");
    let z_cos_err = f64s(&out, "z_cos_err");
    let v_pec = f64s(&out, "v_pec");
    let c = 299_792.458; // km/s, exact (SI definition of the metre)
    let mut beyond_c = 0;
    for (i, ((z, dc), (_, ez))) in d_c.iter().zip(&e).enumerate() {
        let expected = 70.0 * dc;
        assert!(
            (v_rec[i] - expected).abs() < 1e-6 * expected.max(1.0),
            "z = {z}: v_rec {} vs H0·D_C {expected}",
            v_rec[i]
        );
        assert!(v_pec[i].abs() < 0.01, "z = {z}: v_pec = {}", v_pec[i]);
        let err = c * z_cos_err[i] / ez;
        assert!(
            (v_rec_err[i] - err).abs() < 1e-6 * err,
            "z = {z}: v_rec_err {} vs c·σ/E {err}",
            v_rec_err[i]
        );
        beyond_c += usize::from(v_rec[i] > c);
    }
    assert!(beyond_c > 0, "the fixture reaches D_C > c/H0");
}
