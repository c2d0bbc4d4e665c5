//! The velocity covariance, the growth-rate fit, the minimum-variance moments and the
//! correlated mocks, checked against outside references: an independent brute-force
//! quadrature of Górski's (1988, ApJ 332, L7) closed-form pair window written here from the
//! paper's formula, the NumPy `.npy` format specification (NEP 1), and mocks whose velocities
//! are drawn from the covariance with a known fσ8 (the recovered fσ8 is checked against
//! that truth, the acceptance test).
#![allow(clippy::needless_range_loop)] // small vectors and matrices read best with indices

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use flowsift::catalogue::{read_table, ReadOptions};
use flowsift::flow::minimum_variance::{
    ideal_survey, ideal_weights, minimum_variance_weights, MvObjects,
};
use flowsift::physics::cosmology::{Cosmology, CosmologyParams};
use flowsift::physics::power::{LinearPower, PowerParams, RadialVelocityCorrelation};
use nalgebra::{DMatrix, DVector};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};

fn flowsift(args: &[&str]) -> std::process::Output {
    let out = Command::cargo_bin("flowsift")
        .unwrap()
        .args(args)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "flowsift {:?} failed:\n{}\n{}",
        args,
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

/// j0 and j2 from their closed forms (Abramowitz & Stegun 10.1.11–12), with the Taylor
/// series (A&S 10.1.2) below x = 0.05, where the closed forms cancel.
fn j0_j2(x: f64) -> (f64, f64) {
    if x < 0.05 {
        let y = x * x;
        (
            1.0 - y / 6.0 + y * y / 120.0,
            y / 15.0 - y * y / 210.0 + y * y * y / 7560.0,
        )
    } else {
        let (sn, cs) = x.sin_cos();
        (sn / x, (3.0 / (x * x) - 1.0) * sn / x - 3.0 * cs / (x * x))
    }
}

/// ⟨v_a v_b⟩ per (H0 f)²/(2π²): ∫ P(k) f_ab(k) dk with Górski's (1988) form
/// f_ab = (1/3) cos α [j0(kA) − 2 j2(kA)] + j2(kA) r_a r_b sin²α / A², by the trapezoid rule
/// on 200 001 points uniform in ln k from 10⁻⁷ to k_max (no table, no spline, no series of
/// the code under test).
fn brute_force_pair(p: &LinearPower, k_max: f64, a: [f64; 3], b: [f64; 3]) -> f64 {
    let n = 200_001;
    let (u0, u1) = ((1e-7f64).ln(), k_max.ln());
    let h = (u1 - u0) / (n - 1) as f64;
    let norm = |v: [f64; 3]| (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
    let (ra, rb) = (norm(a), norm(b));
    let cos_a = (a[0] * b[0] + a[1] * b[1] + a[2] * b[2]) / (ra * rb);
    let d = [a[0] - b[0], a[1] - b[1], a[2] - b[2]];
    let sep = norm(d);
    let sin2 = (1.0 - cos_a * cos_a).max(0.0);
    let mut acc = 0.0;
    for i in 0..n {
        let k = (u0 + i as f64 * h).exp();
        let (j0, j2) = j0_j2(k * sep);
        let f = if sep == 0.0 {
            1.0 / 3.0
        } else {
            cos_a / 3.0 * (j0 - 2.0 * j2) + j2 * ra * rb * sin2 / (sep * sep)
        };
        let w = if i == 0 || i == n - 1 { 0.5 } else { 1.0 };
        acc += w * h * k * p.pk(k) * f;
    }
    acc
}

/// Covariance elements agree with the brute-force quadrature of the pair window to 2 %
/// (the requirement), for pairs from 0 to ~250 h⁻¹ Mpc apart at various angles,
/// with the k integrals cut at the default 0.2 h/Mpc and at 1 h/Mpc.
#[test]
fn covariance_elements_match_an_independent_pair_window_quadrature() {
    let power = LinearPower::new(PowerParams::planck2018());
    let f = 0.52;
    let scale = (100.0 * f) * (100.0 * f) / (2.0 * std::f64::consts::PI.powi(2));
    let pairs: [([f64; 3], [f64; 3]); 7] = [
        ([40.0, 10.0, 5.0], [40.0, 10.0, 5.0]),
        ([40.0, 10.0, 5.0], [43.0, 12.0, 4.0]),
        ([40.0, 10.0, 5.0], [20.0, 30.0, -10.0]),
        ([80.0, -30.0, 20.0], [-60.0, 40.0, 10.0]),
        ([100.0, 0.0, 0.0], [0.0, 100.0, 0.0]),
        ([120.0, 20.0, -40.0], [-110.0, -30.0, 50.0]),
        ([15.0, 5.0, 2.0], [30.0, 10.0, 4.0]),
    ];
    for k_max in [0.2, 1.0] {
        let corr = RadialVelocityCorrelation::new(&power, f, 400.0, k_max);
        let var = corr.variance();
        for (a, b) in pairs {
            let ours = corr.between(a, b);
            let reference = scale * brute_force_pair(&power, k_max, a, b);
            let tol = 0.02 * reference.abs().max(0.05 * var);
            assert!(
                (ours - reference).abs() < tol,
                "k_max {k_max}, {a:?}–{b:?}: {ours} vs {reference} (km/s)²"
            );
        }
    }
}

/// The FITS and .npy outputs of `covariance` hold the same matrix, symmetric, whose
/// elements match the brute-force pair window at the objects' D_C(z_cmb) positions; the
/// .npy header follows NEP 1; --max-memory refuses a matrix that is too large.
#[test]
fn covariance_command_writes_fits_and_npy() {
    let dir = tempfile::tempdir().unwrap();
    let mock = dir.path().join("m.csv");
    let pv = dir.path().join("m_pv.fits");
    let fits = dir.path().join("cov.fits");
    let npy = dir.path().join("cov.npy");
    flowsift(&[
        "mock",
        "-o",
        s(&mock),
        "--n",
        "60",
        "--seed",
        "5",
        "--z-max",
        "0.03",
        "--mu-err",
        "0.1",
    ]);
    flowsift(&["velocities", s(&mock), "-o", s(&pv)]);
    let out = flowsift(&["covariance", s(&pv), "-o", s(&fits), "--sigma-v", "200"]);
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("N² × 8"), "{text}");
    assert!(text.contains("Linear theory"), "{text}");
    flowsift(&["covariance", s(&pv), "-o", s(&npy), "--sigma-v", "200"]);

    let mut file = fitsio::FitsFile::open(&fits).unwrap();
    let hdu = file.hdu("COVARIANCE").unwrap();
    let m: Vec<f64> = hdu.read_image(&mut file).unwrap();
    let bunit: String = hdu.read_key(&mut file, "BUNIT").unwrap();
    assert_eq!(bunit, "km2 s-2");
    let rows_hdu = file.hdu("ROWS").unwrap();
    let rows: Vec<i64> = rows_hdu.read_col(&mut file, "row").unwrap();
    let n = rows.len();
    assert_eq!(m.len(), n * n);
    assert!(n > 50);

    // NEP 1 (.npy version 1.0): magic, version, header length, dict, 64-byte alignment.
    let bytes = std::fs::read(&npy).unwrap();
    assert_eq!(&bytes[..8], b"\x93NUMPY\x01\x00");
    let hlen = u16::from_le_bytes([bytes[8], bytes[9]]) as usize;
    assert_eq!((10 + hlen) % 64, 0);
    let header = std::str::from_utf8(&bytes[10..10 + hlen]).unwrap();
    assert!(header.contains(&format!("'shape': ({n}, {n})")), "{header}");
    assert!(header.contains("'descr': '<f8'") && header.contains("'fortran_order': False"));
    let from_npy: Vec<f64> = bytes[10 + hlen..]
        .chunks(8)
        .map(|c| f64::from_le_bytes(c.try_into().unwrap()))
        .collect();
    assert_eq!(from_npy, m);
    let sidecar: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("cov.npy.json")).unwrap())
            .unwrap();
    assert_eq!(sidecar["rows"].as_array().unwrap().len(), n);
    assert!(sidecar["record"].is_object());

    // Elements against the brute-force window at the objects' positions (Planck 2018 P(k)
    // shape with the run's h and Ω_m: the default flat ΛCDM H0 = 70, Ω_m = 0.3).
    let t = read_table(&pv, &ReadOptions::default()).unwrap();
    let col = |name: &str| flowsift::flow::sample::float_column(&t, name).unwrap();
    let (glon, glat, zc) = (col("glon"), col("glat"), col("z_cmb"));
    let cosmo = Cosmology::new(CosmologyParams::flat_lcdm(70.0, 0.3)).unwrap();
    let h = 0.7;
    let pos = |row: usize| {
        let (l, b) = (glon[row].to_radians(), glat[row].to_radians());
        let d = cosmo.comoving_distance(zc[row]).unwrap() * h;
        [d * b.cos() * l.cos(), d * b.cos() * l.sin(), d * b.sin()]
    };
    let params = PowerParams {
        h,
        omega_m: 0.3,
        omega_b: 0.02242 / (h * h),
        ..PowerParams::planck2018()
    };
    let power = LinearPower::new(params);
    let f = (0.3f64).powf(0.55); // Ω_m^0.55 at z = 0 for flat ΛCDM (Linder 2005)
    let scale = (100.0 * f) * (100.0 * f) / (2.0 * std::f64::consts::PI.powi(2));
    let var = m[0] - 200.0 * 200.0;
    for (i, j) in [(0, 0), (0, 1), (1, 2), (3, 17), (10, 40), (5, 55)] {
        let (i, j) = (i.min(n - 1), j.min(n - 1));
        assert_eq!(m[i * n + j], m[j * n + i]);
        let mut reference =
            scale * brute_force_pair(&power, 0.2, pos(rows[i] as usize), pos(rows[j] as usize));
        if i == j {
            reference += 200.0 * 200.0;
        }
        let tol = 0.02 * reference.abs().max(0.05 * var);
        assert!(
            (m[i * n + j] - reference).abs() < tol,
            "({i}, {j}): {} vs {reference}",
            m[i * n + j]
        );
    }

    // Refused above --max-memory, naming the size.
    let out = Command::cargo_bin("flowsift")
        .unwrap()
        .args([
            "covariance",
            s(&pv),
            "-o",
            s(&dir.path().join("big.fits")),
            "--max-memory",
            "1K",
        ])
        .output()
        .unwrap();
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("--max-memory") && err.contains("bytes"),
        "{err}"
    );
}

/// One correlated mock through `mock`, `velocities` and `growth`; returns the JSON.
fn growth_on_mock(
    dir: &Path,
    seed: u64,
    fsigma8: f64,
    n: usize,
    extra: &[&str],
) -> serde_json::Value {
    let mock: PathBuf = dir.join(format!("mock{seed}.csv"));
    let pv: PathBuf = dir.join(format!("mock{seed}_pv.fits"));
    let seed_text = seed.to_string();
    let fs_text = fsigma8.to_string();
    let n_text = n.to_string();
    flowsift(&[
        "mock",
        "-o",
        s(&mock),
        "--n",
        &n_text,
        "--seed",
        &seed_text,
        "--correlated",
        "--fsigma8",
        &fs_text,
        "--sigma-v",
        "150",
        "--z-min",
        "0.01",
        "--z-max",
        "0.04",
        "--mu-err",
        "0.05",
    ]);
    flowsift(&["velocities", s(&mock), "-o", s(&pv)]);
    let mut args = vec!["growth", s(&pv), "--json"];
    args.extend_from_slice(extra);
    let out = flowsift(&args);
    serde_json::from_slice(&out.stdout).unwrap()
}

/// The acceptance test: on 12 independent correlated mocks of 800 objects with a
/// known fσ8 = 0.45, the mean recovered fσ8 is within 3 standard errors of the truth, and
/// the truth lies inside twice the reported 68 % interval in at least 10 of the 12. σ_v is
/// fixed at the mocks' true 150 km/s (the fitted case is checked below).
#[test]
fn growth_recovers_the_fsigma8_of_correlated_mocks() {
    let dir = tempfile::tempdir().unwrap();
    let truth = 0.45;
    let mut estimates = Vec::new();
    let mut covered = 0;
    for seed in 0..12u64 {
        let r = growth_on_mock(dir.path(), 100 + seed, truth, 800, &["--sigma-v", "150"]);
        let fs = r["fsigma8"].as_f64().unwrap();
        let lo = r["fsigma8_lo"].as_f64().unwrap();
        let hi = r["fsigma8_hi"].as_f64().unwrap_or(f64::INFINITY);
        assert!(lo <= fs && fs <= hi);
        assert_eq!(r["n_used"].as_u64().unwrap(), 800);
        assert_eq!(r["likelihood_grid"].as_array().unwrap().len(), 401);
        if truth >= fs - 2.0 * (fs - lo) && truth <= fs + 2.0 * (hi - fs) {
            covered += 1;
        }
        estimates.push(fs);
    }
    let n = estimates.len() as f64;
    let mean = estimates.iter().sum::<f64>() / n;
    let sd = (estimates.iter().map(|e| (e - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    let se = sd / n.sqrt();
    assert!(
        (mean - truth).abs() < 3.0 * se,
        "mean fσ8 {mean} ± {se} vs truth {truth}: {estimates:?}"
    );
    assert!(covered >= 10, "covered {covered} of 12: {estimates:?}");
}

/// σ_v fitted and a zero point fitted, on one smaller mock: σ_v lands near the truth
/// (150 km/s) within the spread expected of 400 objects, the zero point near 0 (the mock has
/// none), and binning in cells keeps every object, reported in `cells`.
#[test]
fn growth_fits_sigma_v_and_zero_point_and_bins() {
    let dir = tempfile::tempdir().unwrap();
    let r = growth_on_mock(dir.path(), 7, 0.45, 400, &["--zero-point"]);
    assert_eq!(r["sigma_v_fitted"], true);
    let sv = r["sigma_v"].as_f64().unwrap();
    assert!(sv < 400.0, "σ_v = {sv}");
    let zp = r["zero_point"].as_f64().unwrap();
    assert!(zp.abs() < 0.05, "zero point {zp} mag");
    assert!(r["fiducial"]["power_spectrum"]
        .as_str()
        .unwrap()
        .contains("Eisenstein & Hu"));
    // Binned: every object lands in a cell.
    let pv = dir.path().join("mock7_pv.fits");
    let out = flowsift(&[
        "growth",
        s(&pv),
        "--json",
        "--bin-cells",
        "8",
        "--sigma-v",
        "150",
    ]);
    let b: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(b["cells"]["objects"].as_u64().unwrap(), 400);
    assert_eq!(
        b["n_used"].as_u64().unwrap(),
        b["cells"]["cells"].as_u64().unwrap()
    );
    // The issue spells the quantity `--space`: the same run as `--quantity`.
    let by = |flag: &str| -> serde_json::Value {
        let out = flowsift(&[
            "growth",
            s(&pv),
            "--json",
            flag,
            "velocity",
            "--sigma-v",
            "150",
        ]);
        serde_json::from_slice(&out.stdout).unwrap()
    };
    let (space, quantity) = (by("--space"), by("--quantity"));
    assert_eq!(space["fsigma8"], quantity["fsigma8"]);
    assert_ne!(space["fsigma8"], b["fsigma8"]);
    // Too many objects: refused with a pointer to binning.
    let out = Command::cargo_bin("flowsift")
        .unwrap()
        .args(["growth", s(&pv), "--max-objects", "100"])
        .output()
        .unwrap();
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("--bin-cells"));
}

/// Minimum-variance weights (Watkins, Feldman & Hudson 2009) reproduce the target window's
/// bulk flow: velocities drawn jointly at the sample and the ideal survey from the linear
/// covariance, noise added to the sample; the MV moments minus the ideal survey's flow have
/// the variance the method predicts (χ² of 20 draws × 3 components within its 0.1 %–99.9 %
/// range for 60 degrees of freedom, scipy.stats.chi2.ppf(0.001, 60) = 31.7 and
/// ppf(0.999, 60) = 99.6, from memory), and a pure bulk flow is recovered exactly (the
/// constraint Σ w κ r̂ = δ).
#[test]
fn minimum_variance_moments_reproduce_the_target_window_flow() {
    let power = LinearPower::new(PowerParams::planck2018());
    let f = 0.53;
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    let n = 250;
    let sample: Vec<[f64; 3]> = (0..n)
        .map(|_| loop {
            let p: [f64; 3] =
                std::array::from_fn(|_| 200.0 * rand::Rng::random::<f64>(&mut rng) - 100.0);
            let r = (p[0] * p[0] + p[1] * p[1] + p[2] * p[2]).sqrt();
            if r > 5.0 && r < 100.0 {
                break p;
            }
        })
        .collect();
    let ideal = ideal_survey(30.0, 250, 3);
    let corr = RadialVelocityCorrelation::new(&power, f, 400.0, 1000.0);
    let errors = vec![150.0; n];
    let kappa = vec![1.0; n];
    let mv = minimum_variance_weights(
        &MvObjects {
            positions: &sample,
            kappa: &kappa,
            errors: &errors,
            sigma_star: 0.0,
        },
        &ideal,
        &corr,
    )
    .unwrap();
    // Constraint: a pure bulk flow is recovered exactly.
    let flow = [300.0, -200.0, 100.0];
    let y: Vec<f64> = sample
        .iter()
        .map(|p| {
            let r = (p[0] * p[0] + p[1] * p[1] + p[2] * p[2]).sqrt();
            (0..3).map(|a| flow[a] * p[a] / r).sum()
        })
        .collect();
    let u = mv.apply(&y);
    for a in 0..3 {
        assert!((u[a] - flow[a]).abs() < 1e-6 * 300.0, "{u:?}");
    }
    // Joint draws.
    let all: Vec<[f64; 3]> = sample.iter().chain(&ideal).copied().collect();
    let m = all.len();
    let var = corr.variance();
    let c = DMatrix::from_fn(m, m, |i, j| {
        if i == j {
            var * (1.0 + 1e-9)
        } else {
            corr.between(all[i], all[j])
        }
    });
    let l = c.cholesky().unwrap().l();
    let wp = ideal_weights(&ideal);
    let mut chi2 = 0.0;
    for _ in 0..20 {
        let g = DVector::from_fn(m, |_, _| StandardNormal.sample(&mut rng));
        let v = &l * g;
        let y: Vec<f64> = (0..n)
            .map(|i| {
                let g: f64 = StandardNormal.sample(&mut rng);
                v[i] + errors[i] * g
            })
            .collect();
        let u = mv.apply(&y);
        let mut big_u = [0.0; 3];
        for (k, w) in wp.iter().enumerate() {
            for a in 0..3 {
                big_u[a] += w[a] * v[n + k];
            }
        }
        for a in 0..3 {
            chi2 += (u[a] - big_u[a]).powi(2) / mv.mismatch_cov[a][a];
        }
    }
    assert!((31.7..99.6).contains(&chi2), "χ² = {chi2} for 60 dof");
    // The mismatch is smaller than the ideal window's own flow: the weights do their job.
    for a in 0..3 {
        assert!(
            mv.mismatch_cov[a][a] < mv.ideal_cov[a][a],
            "{:?}",
            mv.mismatch_cov
        );
    }
}

/// `bulkflow --weights mv --monopole` adds the new keys and keeps the existing ones.
#[test]
fn bulkflow_reports_mv_moments_and_monopole() {
    let dir = tempfile::tempdir().unwrap();
    let mock = dir.path().join("m.csv");
    let pv = dir.path().join("m_pv.fits");
    let json = dir.path().join("flow.json");
    flowsift(&[
        "mock",
        "-o",
        s(&mock),
        "--n",
        "300",
        "--seed",
        "9",
        "--z-max",
        "0.03",
        "--mu-err",
        "0.1",
        "--uniform-flow",
        "300,-100,50",
        "--axes",
        "galactic",
    ]);
    flowsift(&["velocities", s(&mock), "-o", s(&pv)]);
    let out = flowsift(&[
        "bulkflow",
        s(&pv),
        "--json",
        "--weights",
        "mv",
        "--window-radius",
        "40",
        "--monopole",
        "--ideal-points",
        "300",
    ]);
    let r: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(r["weights"], "mv");
    assert!(r["minimum_variance"]["v"].as_array().unwrap().len() == 3);
    assert!(r["minimum_variance"]["ideal_lcdm_rms"][0].as_f64().unwrap() > 0.0);
    assert!(r["monopole"]["zero_point"].as_f64().unwrap().abs() < 0.1);
    assert!(r["amplitude"].is_number());
    flowsift(&["bulkflow", s(&pv), "-o", s(&json), "--monopole"]);
    let back = flowsift::catalogue::bulk_flow_file::read_bulk_flow(&json).unwrap();
    assert!(back.amplitude.is_finite());
}
