//! `flowsift velocities`: a catalogue in, the same rows out with CMB-frame redshifts,
//! cosmological redshifts, peculiar velocities, errors and a status.

use std::io::IsTerminal;
use std::path::PathBuf;
use std::sync::Mutex;

use anyhow::anyhow;
use clap::Args;
use indicatif::{ProgressBar, ProgressStyle};

use flowsift::flags::velocities::VelocityFlags;
use flowsift::plan::{plan_velocities, VelocityOrder};
use flowsift::run::{run_velocities, Phase, RunSummary};
use flowsift::settings::RunConfig;

const EXAMPLES: &str = "Examples:\n  flowsift velocities survey.fits -o survey_pv.fits\n  flowsift velocities cat.csv -o out.parquet --z-column cz --z-unit cz --distance-column DM --distance-kind mu\n  flowsift velocities cat.csv -o out.csv --config run.toml --monte-carlo 1000 --seed 7";

/// Derive peculiar velocities for every row of a catalogue.
#[derive(Debug, Args)]
#[command(
    after_help = EXAMPLES,
    after_long_help = format!("{EXAMPLES}\n\n{}", flowsift::catalogue::column_schema::help_text())
)]
pub struct VelocitiesArgs {
    /// Input catalogue: .fits/.fit/.fits.gz, .csv, .tsv or .parquet.
    pub input: PathBuf,
    /// Output catalogue (format by extension). Never the input; an existing file needs --force.
    #[arg(short, long)]
    pub output: PathBuf,
    /// Replace an existing output.
    #[arg(long)]
    pub force: bool,
    /// FITS extension to read, by EXTNAME or index.
    #[arg(long, value_name = "NAME|INDEX")]
    pub hdu: Option<String>,
    #[command(flatten)]
    pub flags: VelocityFlags,
    /// Memory the run may use (e.g. 1.5G, 800M; default a quarter of the machine's): a
    /// catalogue that would take more goes through in blocks of rows (Parquet or FITS in,
    /// Parquet out, no sample stage). Changes no value written.
    #[arg(long = "memory-limit", value_name = "SIZE", value_parser = flowsift::plan::velocities::parse_memory_size)]
    pub memory_limit: Option<u64>,
    /// Print the summary as JSON.
    #[arg(long)]
    pub json: bool,
}
impl VelocitiesArgs {
    /// The flags as a run configuration (sections present only where a flag asks for them).
    pub fn flags_config(&self) -> RunConfig {
        self.flags.flags_config(self.hdu.clone())
    }
}

/// A progress bar on a terminal, nothing otherwise.
pub struct Progress {
    bars: Mutex<Vec<(Phase, ProgressBar)>>,
    total: u64,
    visible: bool,
}

impl Progress {
    pub fn new(total: usize) -> Self {
        Self {
            bars: Mutex::new(vec![]),
            total: total as u64,
            visible: std::io::stderr().is_terminal(),
        }
    }

    pub fn tick(&self, phase: Phase, k: usize) {
        if !self.visible {
            return;
        }
        let mut bars = self.bars.lock().expect("progress lock");
        if !bars.iter().any(|(s, _)| *s == phase) {
            let bar = ProgressBar::new(self.total);
            let label = match phase {
                Phase::Derive => "velocities",
                Phase::MonteCarlo => "monte carlo",
            };
            bar.set_style(
                ProgressStyle::with_template(
                    "{prefix:>12} {bar:40} {human_pos}/{human_len} rows {per_sec} {elapsed_precise}",
                )
                .expect("template")
                .progress_chars("=> "),
            );
            bar.set_prefix(label);
            bars.push((phase, bar));
        }
        if let Some((_, b)) = bars.iter().find(|(s, _)| *s == phase) {
            b.inc(k as u64);
        }
    }

    pub fn finish(&self) {
        for (_, b) in self.bars.lock().expect("progress lock").iter() {
            b.finish_and_clear();
        }
    }
}

pub fn run(a: VelocitiesArgs) -> anyhow::Result<()> {
    run_with(&a, a.flags_config(), &a.output, "velocities")
}

/// Plan and run with these flags, writing the main output to `output`.
pub fn run_with(
    a: &VelocitiesArgs,
    flags: RunConfig,
    output: &std::path::Path,
    step: &str,
) -> anyhow::Result<()> {
    let plan = plan_velocities(VelocityOrder {
        input: a.input.clone(),
        output: output.to_path_buf(),
        run_file: a.flags.config.clone(),
        flags,
        force: a.force,
        override_input_settings: a.flags.override_input_settings,
        command_line: std::env::args().collect::<Vec<_>>().join(" "),
        step: step.to_string(),
        memory_limit: a.memory_limit,
    })
    .map_err(|e| anyhow!(e))?;
    // The row count is known only after reading; the bar sizes itself on first use.
    let progress = Progress::new(0);
    let report = |s: Phase, k: usize| progress.tick(s, k);
    let summary = run_velocities(&plan, &report).map_err(|e| anyhow!(e))?;
    progress.finish();
    print_summary(&summary, a.json)
}

pub fn print_summary(s: &RunSummary, json: bool) -> anyhow::Result<()> {
    if json {
        println!("{}", serde_json::to_string_pretty(s)?);
        return Ok(());
    }
    println!("read {}", s.input.display());
    for m in &s.mapping {
        println!("  {m}");
    }
    for (from, to) in &s.renamed {
        println!("  note: input column {from} kept as {to} (the output column takes its name)");
    }
    println!("rows read {:>10}", s.rows_read);
    println!("rows ok   {:>10}", s.rows_ok);
    for (name, n) in &s.counts {
        if *n > 0 && name != "ok" {
            println!("  {name:<26} {n:>8}");
        }
    }
    if s.monte_carlo_draws > 0 {
        println!("monte carlo: {} draws per object", s.monte_carlo_draws);
    }
    println!("wrote {}", s.output.display());
    if let Some(b) = &s.blocks {
        println!(
            "  read, computed and written in {} blocks of {} rows (memory limit {:.1} GiB; values as in one piece)",
            b.blocks,
            b.rows_per_block,
            b.memory_limit as f64 / (1u64 << 30) as f64
        );
    }
    if let Some(p) = &s.sidecar {
        println!("wrote {}", p.display());
    }
    if let Some((n, p)) = &s.groups {
        println!("groups: {n} rows → {}", p.display());
    }
    if let Some((per, total)) = &s.outliers {
        println!("outliers: {total} flagged");
        for (name, n) in per {
            println!("  {name:<26} {n:>8}");
        }
    }
    if let Some((b, p)) = &s.bulk_flow {
        println!(
            "bulk flow: {:.0} ± {:.0} km/s towards l = {:.1}°, b = {:.1}° ({} objects, fitted to {}, σ_* = {:.0} km/s) → {}",
            b.amplitude, b.amplitude_err, b.l, b.b, b.fit.n_used, b.fit.quantity.name(), b.fit.sigma_star, p.display()
        );
        if let Some(l) = &b.lcdm {
            println!(
                "  ΛCDM expectation per component: ({:.0}, {:.0}, {:.0}) km/s rms; χ² = {:.2} for 3 dof, p = {:.3}",
                l.lcdm_rms[0], l.lcdm_rms[1], l.lcdm_rms[2], l.chi2, l.probability
            );
        }
    }
    if let Some((e, p)) = &s.export {
        println!(
            "export: {} of {} rows ({} not ok, {} outliers left out) → {}",
            e.rows_out,
            e.rows_in,
            e.not_ok,
            e.outliers_left_out,
            p.display()
        );
    }
    if let Some(c) = &s.sample_check {
        println!("{}", c.line());
    }
    for c in &s.cautions {
        if c.starts_with("Implausible result:") {
            println!("warning: {c}");
        } else {
            println!("note: {c}");
        }
    }
    Ok(())
}
