//! `flowsift growth`: the maximum-likelihood growth rate fσ8 of a sample.

use std::path::PathBuf;

use anyhow::anyhow;
use clap::{Args, ValueEnum};

use flowsift::flow::velocity_data::SampleQuantity;
use flowsift::plan::{plan_stage, StageOrder};
use flowsift::run::growth::{run_growth, GrowthChoice, DEFAULT_MAX_OBJECTS};

use super::sample_stages::StageCommon;

/// The quantity of the likelihood.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum GrowthQuantityArg {
    Eta,
    Velocity,
}

/// The maximum-likelihood fσ8 of a flowsift output.
#[derive(Debug, Args)]
#[command(
    about = "The maximum-likelihood growth rate fσ8 from a sample's peculiar velocities (linear ΛCDM covariance)",
    after_help = "Examples:\n  flowsift growth cat_pv.fits --json\n  flowsift growth cat_pv.fits --quantity velocity --sigma-v 250 --zero-point\n  flowsift growth big_pv.fits --bin-cells 10 -o growth.json"
)]
pub struct GrowthArgs {
    /// A flowsift output (from `velocities`, `groups` or `outliers`).
    pub input: PathBuf,
    /// Also write the result as JSON, with the run's record, to this file.
    #[arg(short, long, value_name = "JSON")]
    pub output: Option<PathBuf>,
    /// Quantity of the likelihood: eta (default; its errors are near-Gaussian) or velocity
    /// (also spelled `--space`).
    #[arg(
        long,
        visible_alias = "space",
        value_enum,
        value_name = "Q",
        default_value = "eta"
    )]
    pub quantity: GrowthQuantityArg,
    /// Fix the nonlinear velocity dispersion σ_v, km/s (default: fitted).
    #[arg(long = "sigma-v", value_name = "KM_S", allow_negative_numbers = true)]
    pub sigma_v: Option<f64>,
    /// Fit a zero-point offset of the distance moduli (mag) as a free parameter.
    #[arg(long = "zero-point")]
    pub zero_point: bool,
    /// Average the objects in cubic cells of this side (Mpc) first, with propagated errors.
    #[arg(long = "bin-cells", value_name = "MPC")]
    pub bin_cells: Option<f64>,
    /// Upper wavenumber of the covariance, h/Mpc (default 0.2: linear scales only).
    #[arg(long, value_name = "K")]
    pub kmax: Option<f64>,
    /// Ω_b of the transfer function (default: Planck 2018's Ω_b h² at the run's h).
    #[arg(long = "omega-b", value_name = "OB")]
    pub omega_b: Option<f64>,
    /// Spectral index n_s (default: Planck 2018).
    #[arg(long = "n-s", value_name = "NS")]
    pub n_s: Option<f64>,
    /// Refuse more objects (or cells) than this (default 4000).
    #[arg(long = "max-objects", value_name = "N")]
    pub max_objects: Option<usize>,
    /// Use rows flagged as outliers too.
    #[arg(long = "include-outliers")]
    pub include_outliers: bool,
    #[command(flatten)]
    pub common: StageCommon,
    /// Print JSON.
    #[arg(long)]
    pub json: bool,
    /// Replace an existing output.
    #[arg(long)]
    pub force: bool,
}

pub fn run(a: GrowthArgs) -> anyhow::Result<()> {
    let plan = plan_stage(StageOrder {
        step: "growth".into(),
        input: a.input.clone(),
        output: a.output.clone(),
        other_outputs: vec![],
        other_inputs: vec![],
        flags: flowsift::settings::RunConfig {
            cosmology: a.common.cosmology.choice(),
            ..Default::default()
        },
        force: a.force,
        override_input_settings: a.common.override_input_settings,
        command_line: std::env::args().collect::<Vec<_>>().join(" "),
    })
    .map_err(|e| anyhow!(e))?;
    if let Some(o) = &a.output {
        if !o
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("json"))
        {
            return Err(anyhow!(
                "{}: the growth result is written as JSON (.json)",
                o.display()
            ));
        }
    }
    let choice = GrowthChoice {
        quantity: match a.quantity {
            GrowthQuantityArg::Eta => SampleQuantity::Eta,
            GrowthQuantityArg::Velocity => SampleQuantity::Velocity,
        },
        sigma_v: a.sigma_v,
        zero_point: a.zero_point,
        bin_cells_mpc: a.bin_cells,
        k_max: a.kmax,
        omega_b: a.omega_b,
        n_s: a.n_s,
        max_objects: a.max_objects.unwrap_or(DEFAULT_MAX_OBJECTS),
        include_outliers: a.include_outliers,
    };
    let (r, notes) = run_growth(&plan, &choice).map_err(|e| anyhow!(e))?;
    if a.json {
        println!("{}", serde_json::to_string_pretty(&r)?);
        return Ok(());
    }
    let hi = r
        .fsigma8_hi
        .map(|v| format!("{v:.3}"))
        .unwrap_or_else(|| "unbounded".into());
    println!(
        "fσ8 = {:.3} (68 %: {:.3} – {}) from {} {} of {} ({} space)",
        r.fsigma8,
        r.fsigma8_lo,
        hi,
        r.n_used,
        if r.cells.is_some() {
            "cells"
        } else {
            "objects"
        },
        a.input.display(),
        r.quantity.name()
    );
    println!(
        "  σ_v = {:.0} km/s ({}){}",
        r.sigma_v,
        if r.sigma_v_fitted { "fitted" } else { "fixed" },
        r.zero_point
            .map(|z| format!("; zero point {z:+.4} mag"))
            .unwrap_or_default()
    );
    println!("  ln L = {:.3}", r.log_likelihood);
    println!("  {}", r.fiducial.power_spectrum);
    if let Some(o) = &a.output {
        println!("wrote {}", o.display());
    }
    for c in r.cautions.iter().chain(&notes) {
        println!("note: {c}");
    }
    Ok(())
}
