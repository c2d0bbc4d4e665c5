//! Stand-alone sample stages on a flowsift output: `outliers`, `bulkflow`, `export`, and
//! `groups` / `malmquist`, which re-run `velocities` with that stage on.

use std::path::PathBuf;

use anyhow::anyhow;
use clap::Args;

use flowsift::catalogue::{read_table, write_table, Provenance, ReadOptions, WriteOptions};
use flowsift::flow::export::export_table;
use flowsift::run::stages::{add_outliers, bulk_flow_of, sibling_path};
use flowsift::settings::{GroupChoice, MalmquistChoice};

use super::options::{BulkFlowFlags, CosmologyFlags, OutlierFlags};
use super::velocities::{merged_config, run_with, VelocitiesArgs};

fn provenance(what: &str, input: &std::path::Path) -> Provenance {
    Provenance {
        entries: vec![
            (
                "software".into(),
                format!("flowsift {}", env!("CARGO_PKG_VERSION")),
            ),
            (
                "command".into(),
                std::env::args().collect::<Vec<_>>().join(" "),
            ),
            ("stage".into(), what.into()),
            ("input".into(), input.display().to_string()),
        ],
    }
}

/// Flag outliers in a flowsift output (rows are never removed).
#[derive(Debug, Args)]
pub struct OutliersArgs {
    /// A flowsift output (from `velocities` or `groups`).
    pub input: PathBuf,
    /// Output: the input plus `outlier` and `outlier_reason`.
    #[arg(short, long)]
    pub output: PathBuf,
    #[command(flatten)]
    pub flags: OutlierFlags,
    #[command(flatten)]
    pub cosmology: CosmologyFlags,
    /// Replace an existing output.
    #[arg(long)]
    pub force: bool,
}

pub fn outliers(a: OutliersArgs) -> anyhow::Result<()> {
    let settings = flowsift::flow::outliers::OutlierSettings::from_choice(&a.flags.choice())
        .map_err(|e| anyhow!(e))?;
    let cosmology = a
        .cosmology
        .choice()
        .resolve()
        .map_err(|e| anyhow!(e))?
        .build(1.0)
        .map_err(|e| anyhow!(e))?;
    let mut table = read_table(&a.input, &ReadOptions::default())?;
    let r = add_outliers(&mut table, &cosmology, &settings)
        .map_err(|e| anyhow!("{}: {e}", a.input.display()))?;
    write_table(
        &a.output,
        &table,
        &provenance("outliers", &a.input),
        &WriteOptions {
            force: a.force,
            protected: vec![a.input.clone()],
        },
    )?;
    let (per, total) = r.counts();
    println!(
        "outliers: {total} of {} rows flagged (residual loop: {} iterations)",
        table.frame.height(),
        r.iterations
    );
    for (name, n) in per {
        println!("  {name:<14} {n:>8}");
    }
    println!("wrote {}", a.output.display());
    Ok(())
}

/// The bulk flow of a flowsift output, with its ΛCDM expectation.
#[derive(Debug, Args)]
pub struct BulkFlowArgs {
    /// A flowsift output (from `velocities`, `groups` or `outliers`).
    pub input: PathBuf,
    #[command(flatten)]
    pub flags: BulkFlowFlags,
    #[command(flatten)]
    pub cosmology: CosmologyFlags,
    /// Print JSON.
    #[arg(long)]
    pub json: bool,
}

pub fn bulkflow(a: BulkFlowArgs) -> anyhow::Result<()> {
    let cosmology = a
        .cosmology
        .choice()
        .resolve()
        .map_err(|e| anyhow!(e))?
        .build(1.0)
        .map_err(|e| anyhow!(e))?;
    let table = read_table(&a.input, &ReadOptions::default())?;
    let report = bulk_flow_of(&table, &cosmology, &a.flags.choice())
        .map_err(|e| anyhow!("{}: {e}", a.input.display()))?;
    if a.json {
        println!("{}", serde_json::to_string_pretty(&report)?);
        return Ok(());
    }
    let v = report.v_galactic;
    println!(
        "bulk flow of {} ({} objects, {} space)",
        a.input.display(),
        report.n_used,
        report.fit_space
    );
    println!(
        "  Galactic (x, y, z): ({:.0} ± {:.0}, {:.0} ± {:.0}, {:.0} ± {:.0}) km/s",
        v[0],
        report.cov[0][0].sqrt(),
        v[1],
        report.cov[1][1].sqrt(),
        v[2],
        report.cov[2][2].sqrt()
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
        report.sigma_star,
        if report.sigma_star_fitted {
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
    for c in &report.cautions {
        println!("note: {c}");
    }
    Ok(())
}

/// Write the flow-sample export of a flowsift output.
#[derive(Debug, Args)]
pub struct ExportArgs {
    /// A flowsift output.
    pub input: PathBuf,
    /// Output (any supported format).
    #[arg(short, long)]
    pub output: PathBuf,
    /// Keep rows flagged as outliers (they carry outlier = true).
    #[arg(long = "keep-outliers")]
    pub keep_outliers: bool,
    /// The input's distances are in h⁻¹ Mpc.
    #[arg(long = "input-mpc-over-h")]
    pub input_mpc_over_h: bool,
    #[command(flatten)]
    pub cosmology: CosmologyFlags,
    /// Replace an existing output.
    #[arg(long)]
    pub force: bool,
}

pub fn export(a: ExportArgs) -> anyhow::Result<()> {
    let c = a.cosmology.choice().resolve().map_err(|e| anyhow!(e))?;
    let table = read_table(&a.input, &ReadOptions::default())?;
    let unit_h = a.input_mpc_over_h
        || table.meta.get("d_c").and_then(|m| m.unit.as_deref()) == Some("Mpc/h");
    let (t, s) = export_table(&table, c.params.little_h(), unit_h, a.keep_outliers)
        .map_err(|e| anyhow!("{}: {e}", a.input.display()))?;
    write_table(
        &a.output,
        &t,
        &provenance("export", &a.input),
        &WriteOptions {
            force: a.force,
            protected: vec![a.input.clone()],
        },
    )?;
    println!(
        "export: {} of {} rows ({} not ok, {} outliers left out; column `row` is the input row) → {}",
        s.rows_out,
        s.rows_in,
        s.not_ok,
        s.outliers_left_out,
        a.output.display()
    );
    Ok(())
}

/// Group averaging: the group table goes to -o, the members to --members-out.
#[derive(Debug, Args)]
pub struct GroupsArgs {
    #[command(flatten)]
    pub run: VelocitiesArgs,
    /// Where the members (with `group_index`) go (default: `<output stem>.members.<ext>`).
    #[arg(long = "members-out", value_name = "FILE")]
    pub members_out: Option<PathBuf>,
}

pub fn groups(a: GroupsArgs) -> anyhow::Result<()> {
    let mut config = merged_config(&a.run.config, a.run.flags_config())?;
    let g = config.groups.take().unwrap_or_default();
    config.groups = Some(GroupChoice {
        output: Some(a.run.output.display().to_string()),
        ..g
    });
    let members = a
        .members_out
        .clone()
        .unwrap_or_else(|| sibling_path(&a.run.output, "members"));
    run_with(&a.run, config, &members)
}

/// Malmquist correction, then velocities (on a catalogue or a flowsift output).
#[derive(Debug, Args)]
pub struct MalmquistArgs {
    #[command(flatten)]
    pub run: VelocitiesArgs,
}

pub fn malmquist(a: MalmquistArgs) -> anyhow::Result<()> {
    let mut config = merged_config(&a.run.config, a.run.flags_config())?;
    if config.malmquist.is_none() {
        config.malmquist = Some(MalmquistChoice::default());
    }
    run_with(&a.run, config, &a.run.output)
}
