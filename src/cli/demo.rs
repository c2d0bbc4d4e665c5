//! `flowsift demo`: the main job on the shipped invented survey, with a check against the
//! truth it was generated from.

use std::path::{Path, PathBuf};

use anyhow::anyhow;
use clap::Args;

use flowsift::catalogue::{read_table, ReadOptions, Table};
use flowsift::mock::MockSpec;
use flowsift::plan::{plan_velocities, VelocityOrder};
use flowsift::run::demo::demo_hubble_check;
use flowsift::run::{run_velocities, Phase};
use flowsift::settings::ConventionChoice;
use flowsift::settings::{ErrorChoice, RunConfig};

use super::velocities::{print_summary, Progress};

/// Run the pipeline on the invented demo survey.
#[derive(Debug, Args)]
pub struct DemoArgs {
    /// Folder for the outputs (created if needed; files in it are replaced).
    #[arg(long = "out-dir", value_name = "DIR", default_value = "flowsift-demo")]
    pub out_dir: PathBuf,
    /// The survey file to use (default: demo-data/lantern_survey.fits, else the CSV).
    #[arg(long, value_name = "FILE")]
    pub data: Option<PathBuf>,
}

fn default_data() -> Option<PathBuf> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data");
    ["lantern_survey.fits", "lantern_survey.csv"]
        .iter()
        .map(|f| dir.join(f))
        .find(|p| p.exists())
}

fn column(table: &Table, name: &str) -> anyhow::Result<Vec<Option<f64>>> {
    let c = table
        .frame
        .column(name)
        .map_err(|e| anyhow!("{name}: {e}"))?;
    let f = c.cast(&polars::prelude::DataType::Float64)?;
    Ok(f.f64()?.iter().collect())
}

pub fn run(a: DemoArgs) -> anyhow::Result<()> {
    let spec = MockSpec::demo_survey();
    let data = a.data.clone().or_else(default_data).ok_or_else(|| {
        anyhow!("no demo data found; make it with: flowsift mock --scenario lantern -o demo-data/lantern_survey.csv")
    })?;
    std::fs::create_dir_all(&a.out_dir).map_err(|e| anyhow!("{}: {e}", a.out_dir.display()))?;
    println!(
        "flowsift demo: the {} (invented), {} objects",
        spec.name, spec.n
    );
    println!(
        "  truth: bulk flow ({:.0}, {:.0}, {:.0}) km/s Galactic, σ_v = {} km/s, 0.003 < z < 0.1",
        spec.bulk_flow[0], spec.bulk_flow[1], spec.bulk_flow[2], spec.sigma_v
    );
    println!();
    let config = RunConfig {
        conventions: ConventionChoice {
            sigma_star: Some(0.0),
            ..Default::default()
        },
        errors: ErrorChoice {
            monte_carlo: Some(500),
            seed: Some(20261201),
        },
        outliers: Some(Default::default()),
        bulk_flow: Some(Default::default()),
        export: Some(Default::default()),
        ..Default::default()
    };
    let outputs = ["lantern_velocities.fits", "lantern_velocities.csv"];
    let progress = Progress::new(spec.n);
    let report = |s: Phase, k: usize| progress.tick(s, k);
    let mut last = None;
    for name in outputs {
        let out = a.out_dir.join(name);
        let summary = plan_velocities(VelocityOrder {
            input: data.clone(),
            output: out.clone(),
            run_file: None,
            flags: config.clone(),
            force: true,
            override_input_settings: false,
            command_line: format!(
                "flowsift demo (velocities {} -o {} --monte-carlo 500 --seed 20261201)",
                data.display(),
                out.display()
            ),
            step: "velocities".into(),
            memory_limit: None,
        })
        .map_err(flowsift::run::RunError::from)
        .and_then(|plan| run_velocities(&plan, &report));
        match summary {
            Ok(s) => {
                last = Some(s);
            }
            // FITS output may be unavailable; the CSV run still shows the job.
            Err(e) if name.ends_with(".fits") => eprintln!("note: skipped {name}: {e}"),
            Err(e) => return Err(anyhow!(e)),
        }
    }
    progress.finish();
    let summary = last.ok_or_else(|| anyhow!("no output written"))?;
    print_summary(&summary, false)?;

    // Check against the truth the survey was generated from.
    let out = read_table(&summary.output, &ReadOptions::default())?;
    let v = column(&out, "v_pec")?;
    let e = column(&out, "v_pec_err")?;
    let t = column(&out, "true_v_pec")?;
    let mc16 = column(&out, "v_pec_mc_p16")?;
    let mc84 = column(&out, "v_pec_mc_p84")?;
    let injected: Vec<bool> = out
        .frame
        .column("true_outlier")?
        .bool()?
        .iter()
        .map(|b| b.unwrap_or(false))
        .collect();
    let (mut n, mut sum, mut sum2, mut within, mut within_mc) = (0usize, 0.0, 0.0, 0usize, 0usize);
    let mut errs = vec![];
    for i in 0..v.len() {
        if injected[i] {
            continue;
        }
        if let (Some(v), Some(e), Some(t), Some(lo), Some(hi)) =
            (v[i], e[i], t[i], mc16[i], mc84[i])
        {
            let d = v - t;
            n += 1;
            sum += d;
            sum2 += d * d;
            errs.push(e);
            if d.abs() <= e {
                within += 1;
            }
            if t >= lo && t <= hi {
                within_mc += 1;
            }
        }
    }
    errs.sort_by(f64::total_cmp);
    let median_err = errs.get(errs.len() / 2).copied().unwrap_or(f64::NAN);
    println!();
    println!("truth check ({n} objects without an injected gross error):");
    println!(
        "  v_pec − true_v_pec: mean {:+.0} km/s, rms {:.0} km/s",
        sum / n as f64,
        (sum2 / n as f64).sqrt()
    );
    println!("  median v_pec_err {median_err:.0} km/s");
    println!(
        "  true value within ±v_pec_err: {:.1}% (first-order errors; ≈ 68% expected for Gaussian errors)",
        100.0 * within as f64 / n as f64
    );
    println!(
        "  true value within the Monte Carlo 16–84% interval: {:.1}% (≈ 68% expected)",
        100.0 * within_mc as f64 / n as f64
    );
    // Outliers against the injected ones.
    let flagged: Vec<bool> = out
        .frame
        .column("outlier")?
        .bool()?
        .iter()
        .map(|b| b.unwrap_or(false))
        .collect();
    let n_inj = injected.iter().filter(|x| **x).count();
    let found = flagged
        .iter()
        .zip(&injected)
        .filter(|(f, t)| **f && **t)
        .count();
    let false_pos = flagged
        .iter()
        .zip(&injected)
        .filter(|(f, t)| **f && !**t)
        .count();
    let status: Vec<Option<String>> = out
        .frame
        .column("status")?
        .str()?
        .iter()
        .map(|s| s.map(str::to_string))
        .collect();
    let unsolved = status
        .iter()
        .zip(&injected)
        .filter(|(s, t)| **t && s.as_deref() != Some("ok"))
        .count();
    if unsolved > 0 {
        println!(
            "  injected outliers without a cosmological solution (their distance is beyond any D_A): {unsolved} of {n_inj}"
        );
    }
    println!(
        "  injected outliers flagged: {found} of {n_inj}; clean objects flagged: {false_pos} of {}",
        injected.len() - n_inj
    );
    if let Some((b, _)) = &summary.bulk_flow {
        let t = spec.bulk_flow;
        println!(
            "  bulk flow, Galactic (x, y, z): measured ({:.0} ± {:.0}, {:.0} ± {:.0}, {:.0} ± {:.0}) km/s, true ({:.0}, {:.0}, {:.0}) km/s",
            b.galactic.v[0],
            b.galactic.cov[0][0].sqrt(),
            b.galactic.v[1],
            b.galactic.cov[1][1].sqrt(),
            b.galactic.v[2],
            b.galactic.cov[2][2].sqrt(),
            t[0],
            t[1],
            t[2]
        );
    }
    println!("  (the mean offset of v_pec is the known bias of velocities from log-normal distance errors; η, fitted for the flow, is nearly free of it)");
    corrected_hubble_diagram(&data, &a.out_dir)?;

    // Figures and the run report, from the FITS output (the CSV one if FITS was skipped).
    let fits_out = a.out_dir.join("lantern_velocities.fits");
    let figure_source = if fits_out.exists() {
        fits_out
    } else {
        summary.output.clone()
    };
    let table = read_table(&figure_source, &ReadOptions::default())?;
    let bulkflow = summary.bulk_flow.as_ref().map(|(b, _)| b.clone());
    // The run's cosmology and column mapping from its record; both velocity figures, so that
    // the bias of plotting against the inferred distance shows beside the redshift distance.
    let options = flowsift::report::PlotOptions {
        bulkflow: bulkflow.clone(),
        label: Some(spec.name.clone()),
        inferred_distance: true,
        ..flowsift::report::PlotOptions::for_run(&figure_source, None)
    };
    let figures_dir = a.out_dir.join("figures");
    let figures =
        flowsift::report::render_all(&table, &options, &figures_dir).map_err(|e| anyhow!(e))?;
    let report = a.out_dir.join("report.html");
    flowsift::report::write_report(&table, &figure_source, &figures, bulkflow.as_ref(), &report)
        .map_err(|e| anyhow!(e))?;
    println!();
    println!(
        "figures: {} files in {}",
        figures.len(),
        figures_dir.display()
    );
    println!("report: {}", report.display());
    println!("outputs in {}", a.out_dir.display());
    Ok(())
}

/// The corrected Hubble diagram: `correct` with the scenario's velocity field, then the
/// residual scatter before and after for the SN Ia-like objects.
fn corrected_hubble_diagram(data: &Path, out_dir: &Path) -> anyhow::Result<()> {
    let field_path = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data/lantern_field.fits");
    if !field_path.exists() {
        println!("note: no demo-data/lantern_field.fits; make it with: flowsift field --scenario lantern -o demo-data/lantern_field.fits");
        return Ok(());
    }
    let out = out_dir.join("lantern_corrected.fits");
    let h = demo_hubble_check(data, &field_path, &out).map_err(|e| anyhow!(e))?;
    println!();
    println!("corrected Hubble diagram (flowsift correct with demo-data/lantern_field.fits, σ_v = 250 km/s):");
    for (name, k) in &h.counts {
        println!("  field_flag {name:<18} {k:>6}");
    }
    println!(
        "  SN Ia-like objects ({}): Hubble residual rms {:.4} mag at z_cmb → {:.4} mag at z_cos_model",
        h.objects, h.rms_before, h.rms_after
    );
    println!(
        "  true z_cos within ±z_cos_model_err: {:.1}% (≈ 68% expected)",
        100.0 * h.within_fraction
    );
    println!("wrote {}", out.display());
    Ok(())
}
