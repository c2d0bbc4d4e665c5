//! One `velocities` run end to end, as named steps: read the catalogue (the edge); then, in
//! memory ([`compute_velocities`]), resolve its columns, extract the inputs, build the
//! distance table, correct for Malmquist bias, derive the velocities, Monte Carlo, groups,
//! the flow stages (outliers, bulk flow, export) and the run's record; write everything
//! (the edge). The command line and the demo both call this with a
//! checked [`VelocityPlan`]; it never prints (progress goes through a callback).

pub mod audit;
pub mod correlated_mock;
pub mod covariance;
pub mod demo;
pub mod distances;
pub mod error;
pub mod flow_moments;
pub mod galaxy;
pub mod generate;
pub mod given_frames;
pub mod growth;
pub mod hubble_correction;
pub mod model;
pub mod sample_stages;
pub mod standalone;
pub mod streamed;

use std::path::PathBuf;

use serde::Serialize;

use crate::catalogue::column_schema::meta_of;
use crate::catalogue::delimited::SourceText;
use crate::catalogue::partitioned::Partition;
use crate::catalogue::record::RowCounts;
use crate::catalogue::{
    read_table, write_table, ColumnMeta, ReadOptions, RunRecord, Table, WriteOptions,
};
use crate::physics::cosmology::Cosmology;
use crate::physics::estimators::EstimatorOptions;
use crate::physics::object::ObjectContext;
use crate::physics::sky::SkyRotations;
use crate::pipeline::inputs::UnitGuard;
use crate::pipeline::{self, montecarlo, Derived, InputColumns, RowStatus};
use crate::plan::columns::resolve_columns;
use crate::plan::{ColumnPlan, VelocityPlan};
pub use error::RunError;

/// Which part of the run a progress report is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Phase {
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
    #[serde(serialize_with = "counts_as_object")]
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
    pub bulk_flow: Option<(crate::flow::bulk_flow_report::BulkFlowReport, PathBuf)>,
    /// The flow-sample export.
    pub export: Option<(crate::flow::export::ExportSummary, PathBuf)>,
    /// The sample check (median, scatter, monopole; warnings are also in the cautions).
    pub sample_check: Option<crate::flow::sanity::SampleCheck>,
    /// How the catalogue was read in blocks, when it was ([`streamed`]).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub blocks: Option<streamed::BlockReport>,
}

/// Counts per name, in their order, written as a JSON object (`{"ok": 2990, …}`) rather than
/// a list of pairs.
pub(crate) fn counts_as_object<S: serde::Serializer>(
    counts: &[(String, usize)],
    s: S,
) -> Result<S::Ok, S::Error> {
    use serde::ser::SerializeMap;
    let mut m = s.serialize_map(Some(counts.len()))?;
    for (name, n) in counts {
        m.serialize_entry(name, n)?;
    }
    m.end()
}

/// Read a catalogue as a plan names it (for callers that want to inspect it first).
pub fn read_input(plan: &VelocityPlan) -> Result<Table, RunError> {
    read_table(
        &plan.input,
        &ReadOptions {
            hdu: plan.config().input.hdu.clone(),
        },
    )
    .map_err(Into::into)
}

/// The one rule for how far a distance table must reach: 5% in 1 + z beyond the largest
/// redshift in play, and at least z = 0.1.
pub fn cosmology_reaching(
    params: crate::physics::cosmology::CosmologyParams,
    z_top: f64,
) -> Result<Cosmology, RunError> {
    let z_needed = ((1.0 + z_top.max(0.0)) * 1.05 - 1.0).max(0.1);
    let cosmology = if z_needed > crate::physics::cosmology::DEFAULT_Z_MAX {
        Cosmology::with_z_max(params, z_needed * 1.5).map_err(|e| e.to_string())?
    } else {
        Cosmology::new(params).map_err(|e| e.to_string())?
    };
    cosmology
        .ensure_covers(z_needed)
        .map_err(|e| format!("cosmology: {e}"))?;
    Ok(cosmology)
}

/// What the per-object physics needs from a run's shared settings.
pub(crate) fn object_context<'a>(
    shared: &crate::plan::Shared,
    cosmology: &'a Cosmology,
    length_unit: crate::physics::cosmology::LengthUnit,
) -> ObjectContext<'a> {
    ObjectContext {
        cosmology,
        rotations: SkyRotations::default(),
        cmb: shared.frames.cmb,
        method: shared.frames.method,
        options: EstimatorOptions {
            convention: shared.convention,
            sigma_star_km_s: shared.sigma_star,
            boost: shared.frames.method,
        },
        length_unit,
    }
}

/// The catalogue as read: the table, its text (for a delimited output), and the partitions
/// of a partitioned survey.
type ReadCatalogue = (Table, Option<SourceText>, Option<Vec<Partition>>);

/// Step 1: the catalogue, with its text when a delimited output can copy its columns (the
/// derived columns of an earlier run are dropped by [`compute_velocities`]).
fn read_catalogue(plan: &VelocityPlan) -> Result<ReadCatalogue, RunError> {
    let options = ReadOptions {
        hdu: plan.config().input.hdu.clone(),
    };
    if plan.partitioned {
        let (table, parts) = crate::catalogue::partitioned::read_partitioned(&plan.input, &options)
            .map_err(|e| e.to_string())?;
        return Ok((table, None, Some(parts)));
    }
    let (table, text) = if matches!(
        plan.output_format,
        crate::catalogue::Format::Csv | crate::catalogue::Format::Tsv
    ) {
        crate::catalogue::read_table_keeping_text(&plan.input, &options)
            .map_err(|e| e.to_string())?
    } else {
        (
            read_table(&plan.input, &options).map_err(|e| e.to_string())?,
            None,
        )
    };
    Ok((table, text, None))
}

/// The largest heliocentric redshift of a row that is still ok.
fn top_redshift(input: &InputColumns<'_>) -> f64 {
    input
        .z_helio
        .iter()
        .zip(&input.status)
        .filter(|(_, s)| **s == RowStatus::Ok as u8)
        .map(|(z, _)| *z)
        .fold(0.0_f64, f64::max)
}

/// A note on which errors the error columns hold.
fn error_note(columns: &ColumnPlan, sigma_star: f64, derived: &mut Derived) -> Option<String> {
    match (
        columns.z_err.is_some(),
        columns.distance_err.is_some(),
        sigma_star > 0.0,
    ) {
        (false, false, false) => {
            derived.clear_errors();
            Some("No error columns and no sigma_star: the error columns are left empty.".into())
        }
        (true, false, _) => Some(
            "No distance-error column: v_pec_err holds only the redshift error (and sigma_star)."
                .into(),
        ),
        (false, true, _) => Some(
            "No redshift-error column: v_pec_err holds only the distance error (and sigma_star)."
                .into(),
        ),
        _ => None,
    }
}

/// Monte Carlo percentiles as extra columns.
fn monte_carlo_columns(
    ctx: &ObjectContext<'_>,
    input: &InputColumns<'_>,
    status: &[u8],
    plan: &VelocityPlan,
    first_row: u64,
    progress: &(dyn Fn(Phase, usize) + Sync),
) -> Vec<(String, Vec<f64>, ColumnMeta)> {
    let mc_progress = |k: usize| progress(Phase::MonteCarlo, k);
    let mc = montecarlo::run(
        ctx,
        input,
        status,
        plan.draws,
        plan.seed,
        first_row,
        &mc_progress,
    );
    let col = |name: &str, v: Vec<f64>| (name.to_string(), v, meta_of(name, ""));
    vec![
        col("v_pec_mc_median", mc.median),
        col("v_pec_mc_p16", mc.p16),
        col("v_pec_mc_p84", mc.p84),
        col("mc_failed_draws", mc.failed),
    ]
}

/// The caution of a run on an earlier run's output.
const EARLIER_RUN_NOTE: &str =
    "The input is a flowsift output: its derived columns were recomputed.";

/// The input columns, the heliocentric redshifts derived from another frame, the notes.
type RowInputs<'a> = (InputColumns<'a>, Option<Vec<f64>>, Vec<String>);

/// The input columns of `table` (the whole catalogue or a block of it) in canonical units,
/// positions in ICRS and redshifts heliocentric; the heliocentric redshifts derived from a
/// column in another frame (for the output), and what the frame conversion noted.
fn inputs_of<'a>(
    table: &'a Table,
    columns: &ColumnPlan,
    shared: &crate::plan::Shared,
    guard: UnitGuard,
) -> Result<RowInputs<'a>, RunError> {
    let mut input = pipeline::inputs::extract_with(table, columns, guard)?;
    let (given_z_helio, frame_notes) = given_frames::to_icrs_and_heliocentric(
        given_frames::GivenColumns {
            lon: input.ra_deg.to_mut(),
            lat: input.dec_deg.to_mut(),
            z: input.z_helio.to_mut(),
            z_err: input.z_err.to_mut(),
            status: &mut input.status,
        },
        given_frames::GivenIn {
            sky_frame: columns.sky_frame,
            z_frame: columns.z_frame,
            z_column: &columns.z.column,
        },
        shared,
    )?;
    Ok((input, given_z_helio, frame_notes))
}

/// The per-row part of a run, on the whole catalogue or on one block of it.
struct DerivedRows {
    derived: Derived,
    /// Columns beside the derived ones: z_helio from another frame, Malmquist, the
    /// Watkins–Feldman comparison, Monte Carlo.
    extra: Vec<(String, Vec<f64>, ColumnMeta)>,
    /// What the steps noted, in their order.
    notes: Vec<String>,
}

/// Malmquist (when asked; it corrects `input.distance`), the derived values, the error
/// note, the comparison estimator and Monte Carlo, for rows whose first is row `first_row`
/// of the catalogue.
fn derive_rows(
    plan: &VelocityPlan,
    ctx: &ObjectContext<'_>,
    columns: &ColumnPlan,
    input: &mut InputColumns<'_>,
    given_z_helio: Option<Vec<f64>>,
    first_row: u64,
    progress: &(dyn Fn(Phase, usize) + Sync),
) -> Result<DerivedRows, RunError> {
    let cfg = plan.config();
    let mut notes = vec![];
    let mut extra: Vec<(String, Vec<f64>, ColumnMeta)> = vec![];
    if let Some(z) = given_z_helio {
        extra.push(("z_helio".into(), z, meta_of("z_helio", "")));
    }
    if let Some(m) = &cfg.malmquist {
        let (f, corrected, note) = sample_stages::apply_malmquist(input, m, ctx)?;
        notes.push(note);
        for (name, v) in [("malmquist_factor", f), ("distance_malmquist", corrected)] {
            extra.push((name.into(), v, meta_of(name, "")));
        }
    }
    let derive_progress = |k: usize| progress(Phase::Derive, k);
    let with_wf = cfg.comparisons.watkins_feldman == Some(true);
    let mut derived = pipeline::derive_with(ctx, input, &derive_progress, with_wf);
    notes.extend(error_note(columns, plan.shared.sigma_star, &mut derived));
    if let Some((v, e)) = derived.watkins_feldman.take() {
        extra.push(("v_pec_wf".into(), v, meta_of("v_pec_wf", "")));
        extra.push(("v_pec_wf_err".into(), e, meta_of("v_pec_wf_err", "")));
        notes.push("v_pec_wf: the estimator of Watkins & Feldman (2015, MNRAS 450, 1868), for comparison only; v_pec is the exact estimate.".into());
    }
    if plan.draws >= 2 {
        extra.extend(monte_carlo_columns(
            ctx,
            input,
            &derived.status,
            plan,
            first_row,
            progress,
        ));
    }
    Ok(DerivedRows {
        derived,
        extra,
        notes,
    })
}

/// Add the derived rows to the sample check.
fn tally_rows(tally: &mut crate::flow::sanity::SampleTally, derived: &Derived) {
    let column = |name: &str| derived.get(name).unwrap_or(&[]);
    let ok: Vec<bool> = derived
        .status
        .iter()
        .map(|s| *s == RowStatus::Ok as u8)
        .collect();
    tally.add(
        column("v_pec"),
        column("v_pec_err"),
        column("eta"),
        column("eta_err"),
        &ok,
    );
}

/// The record of the run: every setting as used.
fn velocity_record(
    plan: &VelocityPlan,
    columns: &ColumnPlan,
    rows: RowCounts,
    cautions: &[String],
) -> RunRecord {
    let mut r = plan
        .shared
        .record(&plan.step, &plan.command_line, &plan.inputs());
    let cfg = plan.config();
    r.settings.input = cfg.input.clone();
    r.settings.columns = columns.as_choice();
    r.settings.conventions.length_unit = Some(columns.length_unit);
    r.settings.errors.monte_carlo = Some(plan.draws);
    r.settings.errors.seed = Some(plan.seed);
    r.settings.comparisons.watkins_feldman = Some(cfg.comparisons.watkins_feldman.unwrap_or(false));
    r.settings.malmquist = cfg.malmquist.as_ref().map(|m| m.filled());
    r.settings.groups = cfg.groups.as_ref().map(|g| crate::settings::GroupChoice {
        central_column: g.central_column.clone(),
        output: plan.groups_output.as_ref().map(|p| p.display().to_string()),
    });
    r.settings.outliers = cfg.outliers.as_ref().map(|o| o.filled());
    r.settings.bulk_flow = cfg.bulk_flow.as_ref().map(|b| b.filled());
    r.settings.export = cfg.export.as_ref().map(|e| crate::settings::ExportChoice {
        output: plan.export_output.as_ref().map(|p| p.display().to_string()),
        ..e.filled()
    });
    r.column_sources = columns.sources();
    r.details.insert(
        "frames".into(),
        given_frames::frames_detail(given_frames::GivenIn {
            sky_frame: columns.sky_frame,
            z_frame: columns.z_frame,
            z_column: &columns.z.column,
        }),
    );
    r.rows = Some(rows);
    r.cautions = cautions.to_vec();
    r
}

/// Everything a `velocities` run computes from a catalogue in memory, before any file is
/// written: the output table, the group table, the bulk flow, the export, and the record
/// they are written with.
pub struct VelocityResult {
    pub table: Table,
    pub record: RunRecord,
    pub groups: Option<Table>,
    pub bulk_flow: Option<crate::flow::bulk_flow_report::BulkFlowReport>,
    pub export: Option<(Table, crate::flow::export::ExportSummary)>,
    pub rows_read: usize,
    pub rows_ok: usize,
    /// Rows per status, every status listed.
    pub counts: Vec<(String, usize)>,
    pub mapping: Vec<String>,
    pub renamed: Vec<(String, String)>,
    pub notes: Vec<String>,
    pub replaced: Vec<String>,
    pub outliers: Option<(Vec<(String, usize)>, usize)>,
    pub sample_check: Option<crate::flow::sanity::SampleCheck>,
}

/// Run `velocities` as `plan` says: read at the edge, compute in memory, write at the edge;
/// a catalogue larger than the plan's memory limit goes through in blocks ([`streamed`]).
pub fn run_velocities(
    plan: &VelocityPlan,
    progress: &(dyn Fn(Phase, usize) + Sync),
) -> Result<RunSummary, RunError> {
    let read_notes: Vec<String> = crate::catalogue::atomic::leftovers_note(&plan.output)
        .into_iter()
        .collect();
    if let Some(streaming) = streamed::choose(plan)? {
        return streamed::run(plan, streaming, read_notes, progress);
    }
    let (table, source_text, partitions) = read_catalogue(plan)?;
    let result = compute_velocities(plan, table, read_notes, progress)?;
    write_velocities(plan, result, source_text, partitions.as_deref())
}

/// A `velocities` run on a table in memory (planned by
/// [`crate::plan::plan_velocities_in_memory`]): the output table and the provenance it
/// carries, the same as the file a run on the same rows would write holds
/// ([`crate::catalogue::arrow::table_to_arrow`] gives both as Arrow data).
pub fn velocities_in_memory(
    plan: &VelocityPlan,
    table: Table,
    progress: &(dyn Fn(Phase, usize) + Sync),
) -> Result<(Table, crate::catalogue::Provenance), RunError> {
    let result = compute_velocities(plan, table, vec![], progress)?;
    Ok((result.table, result.record.to_provenance()))
}

/// The computing part of a `velocities` run on a catalogue already in memory (no file is
/// read or written): `read_notes` are what the reading side has to say (kept in the
/// record's cautions in their place).
pub fn compute_velocities(
    plan: &VelocityPlan,
    table: Table,
    read_notes: Vec<String>,
    progress: &(dyn Fn(Phase, usize) + Sync),
) -> Result<VelocityResult, RunError> {
    let cfg = plan.config();
    let shared = &plan.shared;
    let where_ = |e: RunError| RunError::in_file(&plan.input, e);

    let (table, replaced) = sample_stages::strip_earlier_run(table);
    let columns = resolve_columns(&table, &cfg.columns, cfg.conventions.length_unit)
        .map_err(|e| where_(e.into()))?;
    let (mut input, given_z_helio, frame_notes) =
        inputs_of(&table, &columns, shared, UnitGuard::Check).map_err(where_)?;
    // Groups combine the members' own distances: keep them when Malmquist changes them.
    let uncorrected_distance =
        (cfg.groups.is_some() && cfg.malmquist.is_some()).then(|| input.distance.clone());
    let cosmology =
        cosmology_reaching(shared.cosmology.params, top_redshift(&input)).map_err(where_)?;
    let ctx = object_context(shared, &cosmology, columns.length_unit);
    let mut notes = shared.cautions();
    notes.extend(table.notes.iter().cloned());
    notes.extend(frame_notes);
    notes.extend(read_notes);
    if !replaced.is_empty() {
        notes.push(EARLIER_RUN_NOTE.into());
    }
    let rows = derive_rows(
        plan,
        &ctx,
        &columns,
        &mut input,
        given_z_helio,
        plan.first_row,
        progress,
    )?;
    let (derived, extra) = (rows.derived, rows.extra);
    notes.extend(rows.notes);
    let counts_map = derived.counts();
    let rows_read = derived.status.len();
    let rows_ok = *counts_map.get(&RowStatus::Ok).unwrap_or(&0);

    // Groups need the members' inputs (uncorrected distances) and derived redshifts.
    let grouped = match &cfg.groups {
        Some(gc) => {
            let mut source = input.clone();
            if let Some(d) = uncorrected_distance {
                source.distance = d;
            }
            let (gt, g, note) = sample_stages::group_table(
                &ctx,
                &table,
                &columns,
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
    let sample_check = {
        let mut tally = crate::flow::sanity::SampleTally::default();
        tally_rows(&mut tally, &derived);
        tally.finish()
    };
    if let Some(c) = &sample_check {
        notes.extend(
            c.warnings
                .iter()
                .map(|w| format!("Implausible result: {w}")),
        );
    }
    let mapping = columns.describe();
    let (mut out_table, renamed) =
        pipeline::assemble(&table, derived, extra, columns.length_unit.label())?;
    let mut group_out = None;
    if let Some((gt, g)) = grouped {
        sample_stages::add_group_index(&mut out_table, &g)?;
        notes.push(format!(
            "Groups: {} groups from {} rows; outliers, bulk flow and export use the group table.",
            g.key.len(),
            rows_read
        ));
        group_out = Some(gt);
    }

    // The flow stages work on the groups when there are groups.
    let mut outlier_summary = None;
    let mut bulk = None;
    let mut export = None;
    {
        let flow_table: &mut Table = match &mut group_out {
            Some(gt) => gt,
            None => &mut out_table,
        };
        if let Some(settings) = &plan.outliers {
            let r = sample_stages::add_outliers(flow_table, &cosmology, settings)?;
            let (per, total) = r.counts();
            outlier_summary = Some((
                per.into_iter().map(|(n, c)| (n.to_string(), c)).collect(),
                total,
            ));
        }
        if let Some(bc) = &cfg.bulk_flow {
            bulk = Some(sample_stages::bulk_flow_of_table(
                flow_table, &cosmology, bc,
            )?);
        }
        if let Some(ec) = &cfg.export {
            export = Some(crate::flow::export::export_table(
                flow_table,
                cosmology.params().little_h(),
                columns.length_unit == crate::physics::cosmology::LengthUnit::MpcOverH,
                ec.keep_outliers.unwrap_or(false),
            )?);
        }
    }

    notes.extend(crate::catalogue::left_out_note(&plan.output, &out_table));
    let record = velocity_record(
        plan,
        &columns,
        RowCounts {
            read: rows_read,
            ok: rows_ok,
        },
        &notes,
    );
    let counts = RowStatus::ALL
        .iter()
        .map(|s| (s.name().to_string(), *counts_map.get(s).unwrap_or(&0)))
        .collect();
    Ok(VelocityResult {
        table: out_table,
        record,
        groups: group_out,
        bulk_flow: bulk,
        export,
        rows_read,
        rows_ok,
        counts,
        mapping,
        renamed,
        notes,
        replaced,
        outliers: outlier_summary,
        sample_check,
    })
}

/// The writing part of a `velocities` run: every output, atomically, with the run's record.
fn write_velocities(
    plan: &VelocityPlan,
    result: VelocityResult,
    source_text: Option<SourceText>,
    partitions: Option<&[Partition]>,
) -> Result<RunSummary, RunError> {
    let VelocityResult {
        table: out_table,
        record,
        groups: group_out,
        bulk_flow: bulk,
        export,
        rows_read,
        rows_ok,
        counts,
        mapping,
        renamed,
        notes,
        replaced,
        outliers: outlier_summary,
        sample_check,
    } = result;
    let provenance = record.to_provenance();
    let options = WriteOptions {
        force: plan.force,
        protected: plan.inputs().iter().map(|(_, p)| p.to_path_buf()).collect(),
    };
    match partitions {
        Some(parts) => crate::catalogue::partitioned::write_partitioned(
            &plan.output,
            &out_table,
            parts,
            &provenance,
            &options,
        ),
        None => crate::catalogue::write_table_with_text(
            &plan.output,
            &out_table,
            &provenance,
            &options,
            source_text.as_ref(),
        ),
    }
    .map_err(|e| e.to_string())?;
    drop(source_text);
    let mut groups_summary = None;
    if let (Some(gt), Some(path)) = (&group_out, &plan.groups_output) {
        write_table(path, gt, &provenance, &options).map_err(|e| e.to_string())?;
        groups_summary = Some((gt.frame.height(), path.clone()));
    }
    let mut bulk_summary = None;
    if let (Some(report), Some(path)) = (bulk, &plan.bulk_flow_output) {
        crate::catalogue::bulk_flow_file::write_bulk_flow(path, &report, &record, plan.force)?;
        bulk_summary = Some((report, path.clone()));
    }
    let mut export_summary = None;
    if let (Some((t, summary)), Some(path)) = (export, &plan.export_output) {
        write_table(path, &t, &provenance, &options).map_err(|e| e.to_string())?;
        export_summary = Some((summary, path.clone()));
    }

    Ok(RunSummary {
        input: plan.input.clone(),
        output: plan.output.clone(),
        rows_read,
        rows_ok,
        counts,
        mapping,
        renamed,
        cautions: notes,
        monte_carlo_draws: plan.draws,
        sidecar: matches!(
            plan.output_format,
            crate::catalogue::Format::Csv | crate::catalogue::Format::Tsv
        )
        .then(|| crate::catalogue::sidecar_path(&plan.output)),
        replaced,
        groups: groups_summary,
        outliers: outlier_summary,
        bulk_flow: bulk_summary,
        export: export_summary,
        sample_check,
        blocks: None,
    })
}
