//! Stand-alone sample stages on a flowsift output: `outliers`, `bulkflow`, `export`, and
//! `groups` / `malmquist`, which re-run `velocities` with that stage on.

use std::path::PathBuf;

use anyhow::anyhow;
use clap::Args;

use flowsift::plan::{plan_stage, sibling_path, StageOrder};
use flowsift::run::standalone::{run_bulkflow, run_export, run_outliers};
use flowsift::settings::{ExportChoice, GroupChoice, LengthUnit, MalmquistChoice, RunConfig};

use super::velocities::{run_with, VelocitiesArgs};
use flowsift::flags::options::{BulkFlowFlags, CosmologyFlags, OutlierFlags};

/// The stage's order: the input, its output, the flags as a run configuration.
fn order(
    step: &str,
    input: &std::path::Path,
    output: Option<&std::path::Path>,
    flags: RunConfig,
    force: bool,
    override_input_settings: bool,
) -> StageOrder {
    StageOrder {
        step: step.into(),
        input: input.to_path_buf(),
        output: output.map(|p| p.to_path_buf()),
        other_outputs: vec![],
        other_inputs: vec![],
        flags,
        force,
        override_input_settings,
        command_line: std::env::args().collect::<Vec<_>>().join(" "),
    }
}

/// Flags every stand-alone stage shares.
#[derive(Debug, Clone, Args)]
pub struct StageCommon {
    #[command(flatten)]
    pub cosmology: CosmologyFlags,
    /// Use a cosmology that contradicts the one recorded with the input (the output records
    /// both).
    #[arg(long = "override-input-settings")]
    pub override_input_settings: bool,
}

impl StageCommon {
    fn config(&self) -> RunConfig {
        RunConfig {
            cosmology: self.cosmology.choice(),
            ..Default::default()
        }
    }
}

fn print_notes(notes: &[String]) {
    for c in notes {
        println!("note: {c}");
    }
}

/// Flag outliers in a flowsift output (rows are never removed).
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  flowsift outliers cat_pv.fits -o cat_flagged.fits --outlier-threshold 3.5 --neighbours 10"
)]
pub struct OutliersArgs {
    /// A flowsift output (from `velocities` or `groups`).
    pub input: PathBuf,
    /// Output: the input plus `outlier` and `outlier_reason`.
    #[arg(short, long)]
    pub output: PathBuf,
    #[command(flatten)]
    pub flags: OutlierFlags,
    #[command(flatten)]
    pub common: StageCommon,
    /// Replace an existing output.
    #[arg(long)]
    pub force: bool,
}

pub fn outliers(a: OutliersArgs) -> anyhow::Result<()> {
    let mut flags = a.common.config();
    flags.outliers = Some(a.flags.choice());
    let plan = plan_stage(order(
        "outliers",
        &a.input,
        Some(&a.output),
        flags,
        a.force,
        a.common.override_input_settings,
    ))
    .map_err(|e| anyhow!(e))?;
    let (r, rows, notes) = run_outliers(&plan).map_err(|e| anyhow!(e))?;
    let (per, total) = r.counts();
    println!(
        "outliers: {total} of {rows} rows flagged (residual loop: {} iteration{})",
        r.iterations,
        if r.iterations == 1 { "" } else { "s" }
    );
    for (name, n) in per {
        println!("  {name:<14} {n:>8}");
    }
    println!("wrote {}", a.output.display());
    print_notes(&notes);
    Ok(())
}

/// The bulk flow of a flowsift output, with its ΛCDM expectation.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  flowsift bulkflow cat_flagged.fits --json\n  flowsift bulkflow cat_flagged.fits -o cat_flagged.fits.bulkflow.json"
)]
pub struct BulkFlowArgs {
    /// A flowsift output (from `velocities`, `groups` or `outliers`).
    pub input: PathBuf,
    /// Also write the result as JSON, with the run's record, to this file (`plot` finds
    /// INPUT.bulkflow.json by itself).
    #[arg(short, long, value_name = "JSON")]
    pub output: Option<PathBuf>,
    #[command(flatten)]
    pub flags: BulkFlowFlags,
    #[command(flatten)]
    pub moments: super::flow_moments::FlowMomentsFlags,
    #[command(flatten)]
    pub common: StageCommon,
    /// Print JSON.
    #[arg(long)]
    pub json: bool,
    /// Replace an existing output.
    #[arg(long)]
    pub force: bool,
}

pub fn bulkflow(a: BulkFlowArgs) -> anyhow::Result<()> {
    let mut flags = a.common.config();
    flags.bulk_flow = Some(a.flags.choice());
    let plan = plan_stage(order(
        "bulkflow",
        &a.input,
        a.output.as_deref(),
        flags,
        a.force,
        a.common.override_input_settings,
    ))
    .map_err(|e| anyhow!(e))?;
    let (report, moments, notes) = if a.moments.requested() {
        let (r, m, value, notes) =
            flowsift::run::flow_moments::run_flow_moments(&plan, &a.moments.choice())
                .map_err(|e| anyhow!(e))?;
        if a.json {
            println!("{}", serde_json::to_string_pretty(&value)?);
            return Ok(());
        }
        (r, Some(m), notes)
    } else {
        let (r, notes) = run_bulkflow(&plan).map_err(|e| anyhow!(e))?;
        (r, None, notes)
    };
    if a.json {
        println!("{}", serde_json::to_string_pretty(&report)?);
        return Ok(());
    }
    let v = report.galactic.v;
    let cov = report.galactic.cov;
    println!(
        "bulk flow of {} ({} objects, fitted to {})",
        a.input.display(),
        report.fit.n_used,
        report.fit.quantity.name()
    );
    println!(
        "  Galactic (x, y, z): ({:.0} ± {:.0}, {:.0} ± {:.0}, {:.0} ± {:.0}) km/s",
        v[0],
        cov[0][0].sqrt(),
        v[1],
        cov[1][1].sqrt(),
        v[2],
        cov[2][2].sqrt()
    );
    println!(
        "  amplitude {:.0} ± {:.0} km/s towards l = {:.1}°, b = {:.1}°",
        report.amplitude, report.amplitude_err, report.l, report.b
    );
    let s = report.supergalactic.v;
    println!(
        "  supergalactic (SGX, SGY, SGZ): ({:.0}, {:.0}, {:.0}) km/s",
        s[0], s[1], s[2]
    );
    println!(
        "  σ_* = {:.0} km/s ({})",
        report.fit.sigma_star,
        if report.fit.sigma_star_fitted {
            "fitted"
        } else {
            "fixed"
        }
    );
    if let Some(l) = &report.lcdm {
        println!(
            "  ΛCDM: rms per component ({:.0}, {:.0}, {:.0}) km/s; χ² = {:.2} (3 dof), p = {:.3}",
            l.lcdm_rms[0], l.lcdm_rms[1], l.lcdm_rms[2], l.chi2, l.probability
        );
        println!("  {}", l.power_spectrum);
    }
    if let Some(m) = &moments {
        super::flow_moments::print(m);
    }
    if let Some(o) = &a.output {
        println!("wrote {}", o.display());
    }
    for c in &report.cautions {
        println!("note: {c}");
    }
    print_notes(&notes);
    Ok(())
}

/// Write the flow-sample export of a flowsift output.
#[derive(Debug, Args)]
#[command(after_help = "Example:\n  flowsift export cat_flagged.fits -o flow_sample.parquet")]
pub struct ExportArgs {
    /// A flowsift output.
    pub input: PathBuf,
    /// Output (any supported format).
    #[arg(short, long)]
    pub output: PathBuf,
    /// Keep rows flagged as outliers (they carry outlier = true).
    #[arg(long = "keep-outliers")]
    pub keep_outliers: bool,
    /// The input's distances are in h⁻¹ Mpc (needed only when the input has no record).
    #[arg(long = "input-mpc-over-h")]
    pub input_mpc_over_h: bool,
    #[command(flatten)]
    pub common: StageCommon,
    /// Replace an existing output.
    #[arg(long)]
    pub force: bool,
}

pub fn export(a: ExportArgs) -> anyhow::Result<()> {
    let mut flags = a.common.config();
    flags.export = Some(ExportChoice {
        output: None,
        keep_outliers: a.keep_outliers.then_some(true),
    });
    if a.input_mpc_over_h {
        flags.conventions.length_unit = Some(LengthUnit::MpcOverH);
    }
    let plan = plan_stage(order(
        "export",
        &a.input,
        Some(&a.output),
        flags,
        a.force,
        a.common.override_input_settings,
    ))
    .map_err(|e| anyhow!(e))?;
    let (s, notes) = run_export(&plan).map_err(|e| anyhow!(e))?;
    println!(
        "export: {} of {} rows ({} not ok, {} outliers left out; column `row` is the input row) → {}",
        s.rows_out,
        s.rows_in,
        s.not_ok,
        s.outliers_left_out,
        a.output.display()
    );
    print_notes(&notes);
    Ok(())
}

/// Group averaging: members sharing a group identifier become one row each.
#[derive(Debug, Args)]
#[command(
    about = "Combine group members: error-weighted mean distance, mean redshift, group velocities",
    long_about = "Combine group members: error-weighted mean distance, mean redshift, group velocities.\n\nThe group table (one row per group) goes to -o; the members, each with `group_index`, go to --members-out. Groups are found by the group column (default group_id).",
    after_help = "Examples:\n  flowsift groups cat.csv -o groups.fits --members-out members.fits\n  flowsift groups cat.fits -o groups.parquet --group-column GRP --central-column is_bcg",
    after_long_help = "Examples:\n  flowsift groups cat.csv -o groups.fits --members-out members.fits\n  flowsift groups cat.fits -o groups.parquet --group-column GRP --central-column is_bcg"
)]
pub struct GroupsArgs {
    #[command(flatten)]
    pub run: VelocitiesArgs,
    /// Where the members (with `group_index`) go (default: `<output stem>.members.<ext>`).
    #[arg(long = "members-out", value_name = "FILE")]
    pub members_out: Option<PathBuf>,
}

pub fn groups(a: GroupsArgs) -> anyhow::Result<()> {
    let mut flags = a.run.flags_config();
    let g = flags.groups.take().unwrap_or_default();
    flags.groups = Some(GroupChoice {
        output: Some(a.run.output.display().to_string()),
        ..g
    });
    let members = a
        .members_out
        .clone()
        .unwrap_or_else(|| sibling_path(&a.run.output, "members"));
    run_with(&a.run, flags, &members, "groups")
}

/// Malmquist correction, then velocities (on a catalogue or a flowsift output).
#[derive(Debug, Args)]
#[command(
    about = "Malmquist-bias correction of the distances, then velocities",
    long_about = "Malmquist-bias correction of the distances, then velocities.\n\nHomogeneous by default, E[r|d] = d exp(3.5 Δ²) (Lynden-Bell et al. 1988), or with a radial density profile (--malmquist-profile, a table with columns r and n). Adds malmquist_factor and distance_malmquist; the input distance column is kept.",
    after_help = "Examples:\n  flowsift malmquist cat.csv -o cat_pv.fits\n  flowsift malmquist cat.csv -o cat_pv.fits --malmquist-profile density.csv",
    after_long_help = "Examples:\n  flowsift malmquist cat.csv -o cat_pv.fits\n  flowsift malmquist cat.csv -o cat_pv.fits --malmquist-profile density.csv"
)]
pub struct MalmquistArgs {
    #[command(flatten)]
    pub run: VelocitiesArgs,
}

pub fn malmquist(a: MalmquistArgs) -> anyhow::Result<()> {
    let mut flags = a.run.flags_config();
    if flags.malmquist.is_none() {
        flags.malmquist = Some(MalmquistChoice::default());
    }
    run_with(&a.run, flags, &a.run.output, "malmquist")
}
