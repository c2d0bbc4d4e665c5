//! Physics at the edges, each against an outside reference named beside the check.

use assert_cmd::Command;
use flowsift::catalogue::{read_table, ReadOptions};
use polars::prelude::*;

fn flowsift() -> Command {
    Command::cargo_bin("flowsift").unwrap()
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
    let input = dir.path().join("eta.csv");
    let mut text = String::from("ra,dec,z_helio,eta,eta_err\n");
    for (i, e) in [0.02, 0.05, 0.087, 0.12].iter().enumerate() {
        text.push_str(&format!(
            "{},{},{},0.01,{e}\n",
            30.0 + 40.0 * i as f64,
            10.0,
            0.03
        ));
    }
    std::fs::write(&input, text).unwrap();
    let out = dir.path().join("out.csv");
    flowsift()
        .args([
            "malmquist",
            input.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ])
        .assert()
        .success();
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
    let input = dir.path().join("one.csv");
    std::fs::write(
        &input,
        "ra,dec,z_helio,mu,mu_err\n150,20,0.03,35.55,0.001\n210,-30,0.05,36.7,0.001\n",
    )
    .unwrap();
    let out = dir.path().join("out.csv");
    flowsift()
        .args([
            "velocities",
            input.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "--sigma-star",
            "300",
            "--monte-carlo",
            "4000",
            "--seed",
            "11",
        ])
        .assert()
        .success();
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
