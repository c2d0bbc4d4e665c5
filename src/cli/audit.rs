//! `flowsift audit`: which conventions made a catalogue's own derived columns.

use std::path::PathBuf;

use anyhow::anyhow;
use clap::Args;

use flowsift::plan::{plan_audit, AuditOrder};
use flowsift::run::audit::{run_audit, AuditReport};
use flowsift::settings::{InputChoice, RunConfig};

use flowsift::flags::options::{CosmologyFlags, DistanceFlags, FrameFlags, SkyRedshiftFlags};

/// Recompute a catalogue's own derived columns under every convention flowsift knows.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  flowsift audit compilation.csv\n  flowsift audit sne.fits --json --check zcmb_pub:z-cmb --check mu_corr:v-pec\n  flowsift audit tf.csv --distance-column d_hmpc --distance-kind dc -o tf_flagged.csv\n\nQuantities: z-cmb, cz-cmb, z-lg, cz-lg, v-pec, eta, z-cos, cz-cos, distance.\nA match is evidence, not proof: conventions can agree to within a column's rounding."
)]
pub struct AuditArgs {
    /// Catalogue with positions, heliocentric redshifts (and a distance for v-pec, eta,
    /// z-cos and distance columns) and the derived columns to audit.
    pub input: PathBuf,
    /// Print the result as JSON.
    #[arg(long)]
    pub json: bool,
    /// Write the catalogue with an `audit_<column>` residual per audited column and
    /// `audit_flag` (format by extension).
    #[arg(short, long, value_name = "FLAGGED")]
    pub output: Option<PathBuf>,
    /// A column to audit, with what it holds when its name does not say (repeatable).
    #[arg(long = "check", value_name = "COLUMN[:QUANTITY]")]
    pub check: Vec<String>,
    /// Audit only the --check columns (no discovery by name or UCD).
    #[arg(long = "only-checked")]
    pub only_checked: bool,
    /// FITS extension to read, by EXTNAME or index.
    #[arg(long, value_name = "NAME|INDEX")]
    pub hdu: Option<String>,
    #[command(flatten)]
    pub columns: SkyRedshiftFlags,
    #[command(flatten)]
    pub distance_columns: DistanceFlags,
    #[command(flatten)]
    pub cosmology: CosmologyFlags,
    #[command(flatten)]
    pub frame: FrameFlags,
    /// Use settings that contradict the ones recorded with a flowsift input.
    #[arg(long = "override-input-settings")]
    pub override_input_settings: bool,
    /// Replace an existing FLAGGED output.
    #[arg(long)]
    pub force: bool,
}

pub fn run(a: AuditArgs) -> anyhow::Result<()> {
    let plan = plan_audit(AuditOrder {
        input: a.input.clone(),
        output: a.output.clone(),
        flags: RunConfig {
            input: InputChoice { hdu: a.hdu.clone() },
            columns: a.distance_columns.add_to(a.columns.choice()),
            cosmology: a.cosmology.choice(),
            frame: a.frame.choice(),
            ..Default::default()
        },
        checks: a.check.clone(),
        only_checks: a.only_checked,
        force: a.force,
        override_input_settings: a.override_input_settings,
        command_line: std::env::args().collect::<Vec<_>>().join(" "),
    })
    .map_err(|e| anyhow!(e))?;
    let report = run_audit(&plan).map_err(|e| anyhow!(e))?;
    if a.json {
        println!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        print_table(&report);
    }
    Ok(())
}

fn number(x: f64) -> String {
    if !x.is_finite() {
        "—".into()
    } else if x == 0.0 || (1e-3..1e5).contains(&x.abs()) {
        format!("{x:.3}")
    } else {
        format!("{x:.2e}")
    }
}

fn print_table(r: &AuditReport) {
    println!("audit of {} ({} rows)", r.input, r.rows);
    for line in &r.inputs {
        println!("  input {line}");
    }
    println!();
    println!(
        "{:<16} {:<9} {:>10} {:>10} {:>6} {:>11}  best convention",
        "column", "quantity", "rms", "max", "rows", "unexplained"
    );
    for c in &r.columns {
        println!(
            "{:<16} {:<9} {:>10} {:>10} {:>6} {:>11}  {}",
            c.column,
            c.quantity.name(),
            number(c.rms),
            number(c.max_abs),
            c.n_rows,
            c.n_unexplained,
            c.best_label
        );
    }
    for c in &r.columns {
        println!();
        let unit = if c.unit.is_empty() {
            String::new()
        } else {
            format!(" {}", c.unit)
        };
        println!(
            "{} ({}): residuals in{}; a row matches within {}",
            c.column,
            c.quantity.name(),
            if unit.is_empty() {
                " units of z".into()
            } else {
                unit.clone()
            },
            number(c.tolerance)
        );
        for s in c.candidates.iter().take(4) {
            println!(
                "  {:>10} rms within  {:>10} median |r|  {:>6} rows within   {}",
                number(s.rms_within),
                number(s.median_abs),
                s.n_within,
                s.label
            );
        }
        if let Some(f) = &c.fitted_apex {
            println!(
                "  fitted apex: {:.1} ± {:.1} km/s towards l = {:.2}° ± {:.2}°, b = {:.2}° ± {:.2}° ({} rows)",
                f.speed_km_s, f.speed_err_km_s, f.l_deg, f.l_err_deg, f.b_deg, f.b_err_deg, f.n_used
            );
        }
        if !c.unexplained_rows.is_empty() {
            let shown: Vec<String> = c
                .unexplained_rows
                .iter()
                .take(20)
                .map(|r| r.to_string())
                .collect();
            println!(
                "  rows no candidate reproduces: {}{}",
                shown.join(", "),
                if c.unexplained_rows.len() > 20 {
                    ", …"
                } else {
                    ""
                }
            );
        }
        if !c.other_rows.is_empty() {
            println!(
                "  {} rows match another candidate (first: row {}, {})",
                c.other_rows.len(),
                c.other_rows[0].row,
                c.other_rows[0].candidate
            );
        }
    }
    for s in &r.skipped {
        println!("skipped: {s}");
    }
    if let Some(o) = &r.output {
        println!("wrote {o}");
    }
    for c in &r.cautions {
        println!("note: {c}");
    }
    println!("caution: {}", r.caution);
}
