//! `flowsift plot`: figures and a one-file HTML run report from a flowsift output.

use std::path::{Path, PathBuf};

use anyhow::anyhow;
use clap::{Args, ValueEnum};

use flowsift::catalogue::bulk_flow_file::read_bulk_flow;
use flowsift::catalogue::{read_table, ReadOptions};
use flowsift::plan::{plan_stage, StageOrder};
use flowsift::report::{
    render_all, run_figure_settings, write_report, ImageFormat, PaperColumn, PlotOptions,
    SkyChoice, Style,
};
use flowsift::settings::{InputChoice, RunConfig};

/// Figures (Hubble diagram, v_pec against redshift distance, flow map, sky map, bulk flow,
/// normalised velocities), the numbers of each as NAME.data.csv, and DIR/report.html from a
/// flowsift output. Only rows with status ok are drawn.
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
    /// Image files to write for each figure (default: png and svg; with --style paper, pdf, svg
    /// and png).
    #[arg(long, value_enum)]
    pub format: Option<FormatArg>,
    /// screen: title and caption in the image; paper: journal column width, no title or
    /// caption in the image (the caption goes to NAME.caption.txt and the report).
    #[arg(long, value_enum, default_value_t = StyleArg::Screen)]
    pub style: StyleArg,
    /// Paper style: column width of every figure (default: sky maps double, the rest single).
    #[arg(long, value_enum)]
    pub column: Option<ColumnArg>,
    /// Also draw v_pec against the distance inferred from the distance indicator (biased by
    /// construction; labelled so).
    #[arg(long = "inferred-distance")]
    pub inferred_distance: bool,
    /// Bulk-flow result to mark on the sky map and summarise in the report (default:
    /// INPUT.bulkflow.json when that file exists).
    #[arg(long, value_name = "JSON")]
    pub bulkflow: Option<PathBuf>,
    /// The model curve's cosmology: by default the one recorded with the input (else flat
    /// ΛCDM, H0 = 70, Ω_m = 0.3).
    #[command(flatten)]
    pub common: super::sample_stages::StageCommon,
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
    Pdf,
    /// png and svg.
    Both,
    /// pdf, svg and png.
    All,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum StyleArg {
    Screen,
    Paper,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum ColumnArg {
    Single,
    Double,
}

fn default_bulkflow(input: &Path) -> PathBuf {
    let mut s = input.as_os_str().to_owned();
    s.push(".bulkflow.json");
    PathBuf::from(s)
}

pub fn run(a: PlotArgs) -> anyhow::Result<()> {
    let (bulk_path, given) = match &a.bulkflow {
        Some(p) => (Some(p.clone()), true),
        None => {
            let p = default_bulkflow(&a.input);
            (p.exists().then_some(p), false)
        }
    };
    std::fs::create_dir_all(&a.out_dir).map_err(|e| anyhow!("{}: {e}", a.out_dir.display()))?;
    let report = a.out_dir.join("report.html");
    let plan = plan_stage(StageOrder {
        step: "plot".into(),
        input: a.input.clone(),
        output: None,
        other_outputs: vec![("report".into(), report.clone())],
        other_inputs: bulk_path
            .iter()
            .map(|p| ("bulk-flow JSON".to_string(), p.clone()))
            .collect(),
        flags: RunConfig {
            input: InputChoice { hdu: a.hdu.clone() },
            cosmology: a.common.cosmology.choice(),
            ..Default::default()
        },
        // The folder's figures and report are replaced, as documented.
        force: true,
        override_input_settings: a.common.override_input_settings,
        command_line: std::env::args().collect::<Vec<_>>().join(" "),
    })
    .map_err(|e| anyhow!(e))?;
    let table = read_table(&a.input, &ReadOptions { hdu: a.hdu.clone() })?;
    let bulkflow = bulk_path.as_deref().map(read_bulk_flow).transpose()?;
    let run = run_figure_settings(&a.input, a.hdu.as_deref());
    let cosmology_given = a.common.cosmology.choice() != Default::default();
    let cosmology_source = if cosmology_given {
        "given on the command line".to_string()
    } else if run.cosmology.is_some() {
        "the run's, from its record".to_string()
    } else {
        PlotOptions::default().cosmology_source
    };
    let style = match a.style {
        StyleArg::Screen => Style::Screen,
        StyleArg::Paper => Style::Paper,
    };
    let options = PlotOptions {
        sky: match a.sky {
            SkyArg::Galactic => SkyChoice::Galactic,
            SkyArg::Supergalactic => SkyChoice::Supergalactic,
        },
        format: match (a.format, style) {
            (Some(FormatArg::Png), _) => ImageFormat::Png,
            (Some(FormatArg::Svg), _) => ImageFormat::Svg,
            (Some(FormatArg::Pdf), _) => ImageFormat::Pdf,
            (Some(FormatArg::Both), _) => ImageFormat::Both,
            (Some(FormatArg::All), _) | (None, Style::Paper) => ImageFormat::All,
            (None, Style::Screen) => ImageFormat::Both,
        },
        bulkflow: bulkflow.clone(),
        // The plan takes the cosmology recorded with the input unless flags give another.
        cosmology: plan.shared.cosmology.params,
        cosmology_source,
        mu_column: run.mu_column.clone(),
        inferred_distance: a.inferred_distance,
        style,
        column: a.column.map(|c| match c {
            ColumnArg::Single => PaperColumn::Single,
            ColumnArg::Double => PaperColumn::Double,
        }),
        label: a.input.file_name().map(|n| n.to_string_lossy().to_string()),
        ..PlotOptions::default()
    };
    let figures = render_all(&table, &options, &a.out_dir).map_err(|e| anyhow!(e))?;
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
