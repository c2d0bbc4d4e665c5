//! `flowsift plot`: figures and a one-file HTML run report from a flowsift output.

use std::path::{Path, PathBuf};

use anyhow::anyhow;
use clap::{Args, ValueEnum};

use flowsift::catalogue::{read_table, ReadOptions};
use flowsift::physics::cosmology::CosmologyParams;
use flowsift::report::{render_all, write_report, ImageFormat, PlotOptions, SkyChoice};

/// Figures (Hubble diagram, v_pec against distance, sky map, normalised velocities) and
/// DIR/report.html from a flowsift output. Only rows with status ok are drawn.
#[derive(Debug, Args)]
pub struct PlotArgs {
    /// A flowsift output (FITS, CSV/TSV or Parquet, from `velocities`, `outliers`, …).
    #[arg(value_name = "INPUT")]
    pub input: PathBuf,
    /// Folder for the figures and report.html (created if needed; files in it are replaced).
    #[arg(long = "out-dir", value_name = "DIR")]
    pub out_dir: PathBuf,
    /// Coordinates of the sky map.
    #[arg(long, value_enum, default_value_t = SkyArg::Galactic)]
    pub sky: SkyArg,
    /// Image files to write for each figure.
    #[arg(long, value_enum, default_value_t = FormatArg::Both)]
    pub format: FormatArg,
    /// Bulk-flow result to mark on the sky map and summarise in the report (default:
    /// INPUT.bulkflow.json when that file exists).
    #[arg(long, value_name = "JSON")]
    pub bulkflow: Option<PathBuf>,
    /// Hubble constant of the model curve, km/s/Mpc (flat ΛCDM).
    #[arg(long, value_name = "H", default_value_t = 70.0)]
    pub h0: f64,
    /// Matter density Ω_m of the model curve (flat ΛCDM).
    #[arg(long = "omega-m", value_name = "OM", default_value_t = 0.3)]
    pub omega_m: f64,
    /// FITS HDU to read, by EXTNAME or number (default: the first binary table).
    #[arg(long, value_name = "HDU")]
    pub hdu: Option<String>,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum SkyArg {
    Galactic,
    Supergalactic,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum FormatArg {
    Png,
    Svg,
    Both,
}

fn default_bulkflow(input: &Path) -> PathBuf {
    let mut s = input.as_os_str().to_owned();
    s.push(".bulkflow.json");
    PathBuf::from(s)
}

pub fn run(a: PlotArgs) -> anyhow::Result<()> {
    let table = read_table(&a.input, &ReadOptions { hdu: a.hdu.clone() })?;
    let (bulk_path, given) = match &a.bulkflow {
        Some(p) => (Some(p.clone()), true),
        None => {
            let p = default_bulkflow(&a.input);
            (p.exists().then_some(p), false)
        }
    };
    let bulkflow = match &bulk_path {
        Some(p) => {
            let text = std::fs::read_to_string(p).map_err(|e| anyhow!("{}: {e}", p.display()))?;
            let v: serde_json::Value = serde_json::from_str(&text)
                .map_err(|e| anyhow!("{}: not JSON: {e}", p.display()))?;
            Some(v)
        }
        None => None,
    };
    let options = PlotOptions {
        sky: match a.sky {
            SkyArg::Galactic => SkyChoice::Galactic,
            SkyArg::Supergalactic => SkyChoice::Supergalactic,
        },
        format: match a.format {
            FormatArg::Png => ImageFormat::Png,
            FormatArg::Svg => ImageFormat::Svg,
            FormatArg::Both => ImageFormat::Both,
        },
        bulkflow: bulkflow.clone(),
        cosmology: CosmologyParams::flat_lcdm(a.h0, a.omega_m),
        label: a.input.file_name().map(|n| n.to_string_lossy().to_string()),
        ..PlotOptions::default()
    };
    let figures = render_all(&table, &options, &a.out_dir).map_err(|e| anyhow!(e))?;
    let report = a.out_dir.join("report.html");
    write_report(&table, &a.input, &figures, bulkflow.as_ref(), &report).map_err(|e| anyhow!(e))?;
    match (&bulk_path, given) {
        (Some(p), true) => println!("bulk flow from {}", p.display()),
        (Some(p), false) => println!("bulk flow from {} (found next to the input)", p.display()),
        (None, _) => println!(
            "no bulk-flow JSON (none given, no {}): the sky map marks no bulk flow",
            default_bulkflow(&a.input).display()
        ),
    }
    for f in &figures {
        println!("wrote {}", f.display());
    }
    println!("wrote {}", report.display());
    Ok(())
}
