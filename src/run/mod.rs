//! One `velocities` run end to end: read, plan, derive, the sample stages the run file or
//! flags ask for, write, summarise. The command line and the demo both call this; it never
//! prints (progress goes through a callback).

pub mod correct;
pub mod stages;

use std::path::{Path, PathBuf};

use serde::Serialize;

use crate::catalogue::{
    read_table, write_table, ColumnMeta, Provenance, ReadOptions, Table, WriteOptions,
};
use crate::physics::estimators::EstimatorOptions;
use crate::physics::object::ObjectContext;
use crate::physics::sky::SkyRotations;
use crate::pipeline::{self, montecarlo, RowStatus};
use crate::plan::columns::resolve_columns;
use crate::settings::cautions;
use crate::settings::RunConfig;

/// What to run.
pub struct VelocityRequest<'a> {
    pub input: PathBuf,
    pub output: PathBuf,
    /// Run file and flags, merged.
    pub config: RunConfig,
    pub force: bool,
    /// The command line as typed, for provenance.
    pub command_line: String,
    /// Called with the number of rows finished, from worker threads.
    pub progress: &'a (dyn Fn(Stage, usize) + Sync),
}

/// Which part of the run a progress report is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stage {
    Derive,
    MonteCarlo,
}

/// What a run did.
#[derive(Debug, Clone, Serialize)]
pub struct RunSummary {
    pub input: PathBuf,
    pub output: PathBuf,
    pub rows_read: usize,
    pub rows_ok: usize,
    /// Rows per status, every status listed.
    pub counts: Vec<(String, usize)>,
    /// Column mapping, one line per role.
    pub mapping: Vec<String>,
    /// Input columns renamed because a derived column took their name.
    pub renamed: Vec<(String, String)>,
    pub cautions: Vec<String>,
    pub monte_carlo_draws: usize,
    /// Sidecar provenance file (CSV/TSV outputs).
    pub sidecar: Option<PathBuf>,
    /// Columns of an earlier flowsift run that were recomputed.
    pub replaced: Vec<String>,
    /// Groups: (number of groups, path of the group table).
    pub groups: Option<(usize, PathBuf)>,
    /// Outliers: counts per reason and in all.
    pub outliers: Option<(Vec<(String, usize)>, usize)>,
    /// The bulk flow and where its JSON went.
    pub bulk_flow: Option<(crate::flow::bulk::BulkFlowReport, PathBuf)>,
    /// The flow-sample export.
    pub export: Option<(crate::flow::export::ExportSummary, PathBuf)>,
}

/// Seconds since 1970 → "YYYY-MM-DDThh:mm:ssZ" (proleptic Gregorian, UTC), by the
/// days-to-civil algorithm of Hinnant, "chrono-Compatible Low-Level Date Algorithms".
pub fn utc_timestamp(secs: u64) -> String {
    let days = (secs / 86_400) as i64;
    let rem = secs % 86_400;
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let y = yoe + era * 400;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = if m <= 2 { y + 1 } else { y };
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}

fn now_utc() -> String {
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_secs())
        .unwrap_or(0);
    utc_timestamp(secs)
}

/// Read the input table (for callers that want to inspect it first).
pub fn read_input(path: &Path, config: &RunConfig) -> Result<Table, String> {
    read_table(
        path,
        &ReadOptions {
            hdu: config.input.hdu.clone(),
        },
    )
    .map_err(|e| e.to_string())
}

/// Run `velocities`.
pub fn run_velocities(req: &VelocityRequest<'_>) -> Result<RunSummary, String> {
    let cfg = &req.config;
    // Resolve everything that does not need the file first, so bad flags fail fast.
    let cosmology_choice = cfg
        .cosmology
        .resolve()
        .map_err(|e| format!("cosmology: {e}"))?;
    let frames = cfg
        .frame
        .resolve()
        .map_err(|e| format!("rest frame: {e}"))?;
    let convention = cfg.conventions.dl_convention.unwrap_or_default();
    let sigma_star = cfg.conventions.sigma_star.unwrap_or(0.0);
    if !(sigma_star.is_finite() && sigma_star >= 0.0) {
        return Err(format!(
            "sigma_star must be a non-negative number of km/s, got {sigma_star}"
        ));
    }
    let draws = cfg.errors.monte_carlo.unwrap_or(0);
    let seed = cfg.errors.seed.unwrap_or(1);
    if draws == 1 {
        return Err("monte_carlo needs at least 2 draws per object to give percentiles".into());
    }
    let out_format = crate::catalogue::Format::from_path(&req.output).map_err(|_| {
        format!(
            "{}: unknown output type: use .fits/.fit/.fits.gz, .csv, .tsv or .parquet",
            req.output.display()
        )
    })?;
    if req.output.exists() && !req.force {
        return Err(format!(
            "{}: output exists; pass --force to replace it",
            req.output.display()
        ));
    }

    // A delimited output can copy the input's columns from its text.
    let (table, source_text) = if matches!(
        out_format,
        crate::catalogue::Format::Csv | crate::catalogue::Format::Tsv
    ) {
        crate::catalogue::read_table_keeping_text(
            &req.input,
            &crate::catalogue::ReadOptions {
                hdu: cfg.input.hdu.clone(),
            },
        )
        .map_err(|e| e.to_string())?
    } else {
        (read_input(&req.input, cfg)?, None)
    };
    let (table, replaced) = stages::strip_earlier_run(table);
    let plan = resolve_columns(&table, &cfg.columns, cfg.conventions.length_unit)
        .map_err(|e| format!("{}: {e}", req.input.display()))?;
    let mut input =
        pipeline::extract(&table, &plan).map_err(|e| format!("{}: {e}", req.input.display()))?;
    // Groups combine the members' own distances: keep them when Malmquist changes them.
    let uncorrected_distance =
        (cfg.groups.is_some() && cfg.malmquist.is_some()).then(|| input.distance.clone());

    // The distance table must cover the redshifts in play.
    let z_top = input
        .z_helio
        .iter()
        .zip(&input.status)
        .filter(|(_, s)| **s == RowStatus::Ok as u8)
        .map(|(z, _)| *z)
        .fold(0.0_f64, f64::max);
    let z_needed = ((1.0 + z_top) * 1.02 - 1.0).max(0.1);
    let cosmology = if z_needed > crate::physics::cosmology::DEFAULT_Z_MAX {
        crate::physics::cosmology::Cosmology::with_z_max(cosmology_choice.params, z_needed * 1.5)
            .map_err(|e| e.to_string())?
    } else {
        crate::physics::cosmology::Cosmology::new(cosmology_choice.params)
            .map_err(|e| e.to_string())?
    };
    cosmology
        .ensure_covers(z_needed.min(cosmology.z_max()))
        .map_err(|e| format!("cosmology: {e}"))?;

    let ctx = ObjectContext {
        cosmology: &cosmology,
        rotations: SkyRotations::default(),
        cmb: frames.cmb,
        method: frames.method,
        options: EstimatorOptions {
            convention,
            sigma_star_km_s: sigma_star,
        },
        length_unit: plan.length_unit,
    };
    let mut notes = cautions(&cosmology_choice, &frames, convention);
    if !replaced.is_empty() {
        notes.push("The input is a flowsift output: its derived columns were recomputed.".into());
    }
    let mut extra: Vec<(String, Vec<f64>, ColumnMeta)> = vec![];
    if let Some(m) = &cfg.malmquist {
        let factor = plan.length_unit.from_mpc_factor(cosmology.params());
        let (f, corrected, note) = stages::apply_malmquist(&mut input, m, &cosmology, factor)?;
        notes.push(note);
        extra.push((
            "malmquist_factor".into(),
            f,
            ColumnMeta {
                unit: None,
                ucd: Some("arith.factor".into()),
            },
        ));
        extra.push((
            "distance_malmquist".into(),
            corrected,
            ColumnMeta {
                unit: None,
                ucd: Some("pos.distance".into()),
            },
        ));
    }
    let derive_progress = |k: usize| (req.progress)(Stage::Derive, k);
    let mut derived = pipeline::derive(&ctx, &input, &derive_progress);
    match (
        plan.z_err.is_some(),
        plan.distance_err.is_some(),
        sigma_star > 0.0,
    ) {
        (false, false, false) => {
            derived.clear_errors();
            notes.push(
                "No error columns and no sigma_star: the error columns are left empty.".into(),
            );
        }
        (true, false, _) => notes.push(
            "No distance-error column: v_pec_err holds only the redshift error (and sigma_star)."
                .into(),
        ),
        (false, true, _) => notes.push(
            "No redshift-error column: v_pec_err holds only the distance error (and sigma_star)."
                .into(),
        ),
        _ => {}
    }
    let counts_map = derived.counts();
    let rows_read = derived.status.len();
    let rows_ok = *counts_map.get(&RowStatus::Ok).unwrap_or(&0);

    if draws >= 2 {
        let mc_progress = |k: usize| (req.progress)(Stage::MonteCarlo, k);
        let mc = montecarlo::run(&ctx, &input, &derived.status, draws, seed, &mc_progress);
        let kms = |ucd: &str| ColumnMeta {
            unit: Some("km/s".into()),
            ucd: Some(ucd.into()),
        };
        extra.push((
            "v_pec_mc_median".into(),
            mc.median,
            kms("phys.veloc;stat.median"),
        ));
        extra.push(("v_pec_mc_p16".into(), mc.p16, kms("phys.veloc;stat.min")));
        extra.push(("v_pec_mc_p84".into(), mc.p84, kms("phys.veloc;stat.max")));
        extra.push((
            "mc_failed_draws".into(),
            mc.failed,
            ColumnMeta {
                unit: None,
                ucd: Some("meta.number".into()),
            },
        ));
    }

    // Groups need the members' inputs (uncorrected distances) and derived redshifts.
    let grouped = match &cfg.groups {
        Some(gc) => {
            let mut source = input.clone();
            if let Some(d) = uncorrected_distance {
                source.distance = d;
            }
            let (gt, g, note) = stages::group_table(
                &ctx,
                &table,
                &plan,
                &source,
                &derived,
                gc,
                cfg.malmquist.as_ref(),
            )?;
            if let Some(n) = note {
                notes.push(format!("Groups: {n}"));
            }
            Some((gt, g))
        }
        None => None,
    };
    drop(input);
    let mapping = plan.describe();
    let (mut out_table, renamed) =
        pipeline::assemble(&table, derived, extra, plan.length_unit.label())?;
    let mut group_out = None;
    if let Some((gt, g)) = grouped {
        let idx: Vec<i64> = g.group_of.iter().map(|x| *x as i64).collect();
        out_table.frame = out_table
            .frame
            .hstack(&[polars::prelude::Column::new("group_index".into(), idx)])
            .map_err(|e| e.to_string())?;
        out_table.meta.insert(
            "group_index".into(),
            ColumnMeta {
                unit: None,
                ucd: Some("meta.id.parent".into()),
            },
        );
        let path = match cfg.groups.as_ref().and_then(|c| c.output.clone()) {
            Some(p) => PathBuf::from(p),
            None => stages::sibling_path(&req.output, "groups"),
        };
        notes.push(format!(
            "Groups: {} groups from {} rows; outliers, bulk flow and export use the group table.",
            g.key.len(),
            rows_read
        ));
        group_out = Some((gt, path));
    }
    // The table the flow stages work on: the groups when there are groups.
    let mut outlier_summary = None;
    let mut bulk = None;
    let mut export = None;
    {
        let flow_table: &mut Table = match &mut group_out {
            Some((gt, _)) => gt,
            None => &mut out_table,
        };
        if let Some(oc) = &cfg.outliers {
            let settings = crate::flow::outliers::OutlierSettings::from_choice(oc)?;
            let r = stages::add_outliers(flow_table, &cosmology, &settings)?;
            let (per, total) = r.counts();
            outlier_summary = Some((
                per.into_iter().map(|(n, c)| (n.to_string(), c)).collect(),
                total,
            ));
        }
        if let Some(bc) = &cfg.bulk_flow {
            let report = stages::bulk_flow_of(flow_table, &cosmology, bc)?;
            bulk = Some((report, sibling_json(&req.output, "bulkflow")));
        }
        if let Some(ec) = &cfg.export {
            let (t, summary) = crate::flow::export::export_table(
                flow_table,
                cosmology.params().little_h(),
                plan.length_unit == crate::physics::cosmology::LengthUnit::MpcOverH,
                ec.keep_outliers.unwrap_or(false),
            )?;
            let path = match &ec.output {
                Some(p) => PathBuf::from(p),
                None => stages::sibling_path(&req.output, "flow"),
            };
            export = Some((t, summary, path));
        }
    }

    let json = |v: &dyn erased::Json| v.to_json();
    let mut provenance = Provenance::default();
    let mut add = |k: &str, v: String| provenance.entries.push((k.to_string(), v));
    add(
        "software",
        format!("flowsift {}", env!("CARGO_PKG_VERSION")),
    );
    add("command", req.command_line.clone());
    add("date", now_utc());
    add("input", req.input.display().to_string());
    add("input_rows", rows_read.to_string());
    add("rows_ok", rows_ok.to_string());
    add("cosmology", json(&cosmology_choice));
    add("cmb_apex", json(&frames.cmb_apex));
    add("boost", frames.method.name().to_string());
    add("local_group_apex", frames.local_group_apex.name.clone());
    add("galactic_rest_apex", frames.galactic_rest_apex.name.clone());
    add("dl_convention", convention.name().to_string());
    add("length_unit", plan.length_unit.label().to_string());
    add("sigma_star_km_s", sigma_star.to_string());
    add("columns", json(&plan));
    add("monte_carlo_draws", draws.to_string());
    if draws >= 2 {
        add("monte_carlo_seed", seed.to_string());
    }
    for (k, v) in [
        ("malmquist", json(&cfg.malmquist)),
        ("groups", json(&cfg.groups)),
        ("outliers", json(&cfg.outliers)),
        ("bulk_flow", json(&cfg.bulk_flow)),
        ("export", json(&cfg.export)),
    ] {
        if v != "null" {
            add(k, v);
        }
    }
    add("cautions", notes.join(" | "));

    let options = WriteOptions {
        force: req.force,
        protected: vec![req.input.clone()],
    };
    crate::catalogue::write_table_with_text(
        &req.output,
        &out_table,
        &provenance,
        &options,
        source_text.as_ref(),
    )
    .map_err(|e| e.to_string())?;
    drop(source_text);
    let mut groups_summary = None;
    if let Some((gt, path)) = &group_out {
        write_table(path, gt, &provenance, &options).map_err(|e| e.to_string())?;
        groups_summary = Some((gt.frame.height(), path.clone()));
    }
    if let Some((report, path)) = &bulk {
        let value = serde_json::to_value(report).map_err(|e| e.to_string())?;
        crate::catalogue::write_json_atomically(path, &value, req.force)
            .map_err(|e| e.to_string())?;
    }
    let mut export_summary = None;
    if let Some((t, summary, path)) = export {
        write_table(&path, &t, &provenance, &options).map_err(|e| e.to_string())?;
        export_summary = Some((summary, path));
    }

    let counts = RowStatus::ALL
        .iter()
        .map(|s| (s.name().to_string(), *counts_map.get(s).unwrap_or(&0)))
        .collect();
    Ok(RunSummary {
        input: req.input.clone(),
        output: req.output.clone(),
        rows_read,
        rows_ok,
        counts,
        mapping,
        renamed,
        cautions: notes,
        monte_carlo_draws: draws,
        sidecar: matches!(
            out_format,
            crate::catalogue::Format::Csv | crate::catalogue::Format::Tsv
        )
        .then(|| crate::catalogue::sidecar_path(&req.output)),
        replaced,
        groups: groups_summary,
        outliers: outlier_summary,
        bulk_flow: bulk,
        export: export_summary,
    })
}

/// `<output>.<tag>.json`.
fn sibling_json(output: &Path, tag: &str) -> PathBuf {
    let mut s = output.as_os_str().to_owned();
    s.push(format!(".{tag}.json"));
    PathBuf::from(s)
}

mod erased {
    /// Serialise anything serialisable to compact JSON (for provenance values).
    pub trait Json {
        fn to_json(&self) -> String;
    }
    impl<T: serde::Serialize> Json for T {
        fn to_json(&self) -> String {
            serde_json::to_string(self).unwrap_or_default()
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// 2026-12-01T00:00:00Z is 1796083200 s after the epoch (20788 days × 86400, by
    /// counting: 56 years of 365 days plus 14 leap days to 2026-01-01, plus 334 days).
    #[test]
    fn timestamps() {
        assert_eq!(utc_timestamp(0), "1970-01-01T00:00:00Z");
        assert_eq!(utc_timestamp(951_782_400), "2000-02-29T00:00:00Z");
        assert_eq!(utc_timestamp(1_796_083_200 + 3661), "2026-12-01T01:01:01Z");
    }
}
