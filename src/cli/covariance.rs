//! `flowsift covariance`: the linear-theory covariance of a sample's radial peculiar
//! velocities (or μ, or η), as FITS or NumPy `.npy`.

use std::io::IsTerminal;
use std::path::PathBuf;

use anyhow::anyhow;
use clap::{Args, ValueEnum};
use indicatif::{ProgressBar, ProgressStyle};

use flowsift::flow::velocity_data::SampleQuantity;
use flowsift::plan::{plan_stage, StageOrder};
use flowsift::run::covariance::{
    is_npy, npy_sidecar, run_covariance, CovarianceChoice, DEFAULT_MAX_MEMORY_BYTES,
};

use super::sample_stages::StageCommon;

/// The quantity of a covariance.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum QuantityArg {
    Velocity,
    Mu,
    Eta,
}

impl QuantityArg {
    pub fn quantity(self) -> SampleQuantity {
        match self {
            QuantityArg::Velocity => SampleQuantity::Velocity,
            QuantityArg::Mu => SampleQuantity::Mu,
            QuantityArg::Eta => SampleQuantity::Eta,
        }
    }
}

/// A byte count: digits with an optional K, M or G (powers of 1000).
pub fn parse_bytes(text: &str) -> Result<u64, String> {
    let t = text.trim();
    let (digits, factor) = match t.chars().last().map(|c| c.to_ascii_uppercase()) {
        Some('K') => (&t[..t.len() - 1], 1_000u64),
        Some('M') => (&t[..t.len() - 1], 1_000_000),
        Some('G') => (&t[..t.len() - 1], 1_000_000_000),
        _ => (t, 1),
    };
    let v: f64 = digits
        .trim()
        .parse()
        .map_err(|_| format!("'{text}' is not a size (e.g. 2G, 500M, 100000)"))?;
    if !(v.is_finite() && v >= 0.0) {
        return Err(format!("'{text}' is not a size"));
    }
    Ok((v * factor as f64) as u64)
}

/// The linear-theory covariance of the radial peculiar velocities of the usable rows.
#[derive(Debug, Args)]
#[command(
    about = "The linear-theory ΛCDM covariance of a sample's radial peculiar velocities (FITS or .npy)",
    after_help = "Examples:\n  flowsift covariance cat_pv.fits -o cov.fits\n  flowsift covariance cat_pv.fits -o cov.npy --quantity eta --sigma-v 300"
)]
pub struct CovarianceArgs {
    /// A flowsift output (from `velocities`, `groups` or `outliers`).
    pub input: PathBuf,
    /// The matrix: FITS (.fits, .fit, .fits.gz) or NumPy (.npy, with a sidecar COV.npy.json).
    #[arg(short, long, value_name = "COV")]
    pub output: PathBuf,
    /// Quantity of the matrix: velocity (km²/s²; the default), mu (mag²) or eta.
    #[arg(long, value_enum, value_name = "Q", default_value = "velocity")]
    pub quantity: QuantityArg,
    /// σ8 of the power spectrum (default: Planck 2018, 0.8102).
    #[arg(long, value_name = "S8")]
    pub sigma8: Option<f64>,
    /// Growth rate f (default: Ω_m^0.55 of the cosmology at z = 0).
    #[arg(long = "growth-rate", value_name = "F")]
    pub growth_rate: Option<f64>,
    /// Upper wavenumber of the k integrals, h/Mpc (default 0.2: linear scales only).
    #[arg(long, value_name = "K")]
    pub kmax: Option<f64>,
    /// Add this nonlinear velocity dispersion on the diagonal, km/s.
    #[arg(long = "sigma-v", value_name = "KM_S", allow_negative_numbers = true)]
    pub sigma_v: Option<f64>,
    /// Ω_b of the transfer function (default: Planck 2018's Ω_b h² at the run's h).
    #[arg(long = "omega-b", value_name = "OB")]
    pub omega_b: Option<f64>,
    /// Spectral index n_s (default: Planck 2018).
    #[arg(long = "n-s", value_name = "NS")]
    pub n_s: Option<f64>,
    /// Refuse a matrix above this size (N² × 8 bytes); K, M, G suffixes (default 2G).
    #[arg(long = "max-memory", value_name = "BYTES", value_parser = parse_bytes)]
    pub max_memory: Option<u64>,
    /// Use rows flagged as outliers too.
    #[arg(long = "include-outliers")]
    pub include_outliers: bool,
    #[command(flatten)]
    pub common: StageCommon,
    /// Replace existing outputs.
    #[arg(long)]
    pub force: bool,
}

pub fn run(a: CovarianceArgs) -> anyhow::Result<()> {
    let mut other_outputs = vec![("covariance".to_string(), a.output.clone())];
    if is_npy(&a.output) {
        other_outputs.push(("covariance sidecar".into(), npy_sidecar(&a.output)));
    } else {
        let name = a.output.display().to_string().to_ascii_lowercase();
        if ![".fits", ".fit", ".fts", ".fits.gz", ".fit.gz"]
            .iter()
            .any(|e| name.ends_with(e))
        {
            return Err(anyhow!(
                "{}: a covariance is written as FITS (.fits, .fit, .fits.gz) or NumPy (.npy)",
                a.output.display()
            ));
        }
    }
    let plan = plan_stage(StageOrder {
        step: "covariance".into(),
        input: a.input.clone(),
        output: None,
        other_outputs,
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
    let choice = CovarianceChoice {
        quantity: a.quantity.quantity(),
        sigma8: a.sigma8,
        growth_rate: a.growth_rate,
        k_max: a.kmax,
        sigma_v: a.sigma_v,
        omega_b: a.omega_b,
        n_s: a.n_s,
        max_memory_bytes: a.max_memory.unwrap_or(DEFAULT_MAX_MEMORY_BYTES),
        include_outliers: a.include_outliers,
    };
    let visible = std::io::stderr().is_terminal();
    let bar = std::sync::OnceLock::<ProgressBar>::new();
    let summary = run_covariance(
        &plan,
        &choice,
        &a.output,
        &|size| {
            println!(
                "covariance: {} × {} matrix, {} bytes ({:.1} MB; N² × 8) in memory",
                size.n,
                size.n,
                size.bytes,
                size.bytes as f64 / 1e6
            );
        },
        &|done, total| {
            if !visible {
                return;
            }
            let b = bar.get_or_init(|| {
                let b = ProgressBar::new(total as u64);
                if let Ok(style) = ProgressStyle::with_template(
                    "{prefix:>12} {bar:40} {pos}/{len} rows {elapsed_precise}",
                ) {
                    b.set_style(style.progress_chars("=> "));
                }
                b.set_prefix("covariance");
                b
            });
            b.set_position(done as u64);
        },
    )
    .map_err(|e| anyhow!(e))?;
    if let Some(b) = bar.get() {
        b.finish_and_clear();
    }
    println!(
        "wrote {} ({}, {} rows; unit {})",
        a.output.display(),
        summary.quantity.name(),
        summary.shape[0],
        if summary.unit.is_empty() {
            "none"
        } else {
            &summary.unit
        }
    );
    if is_npy(&a.output) {
        println!("wrote {}", npy_sidecar(&a.output).display());
    }
    println!("  {}", summary.fiducial.power_spectrum);
    for c in &summary.cautions {
        println!("note: {c}");
    }
    Ok(())
}
