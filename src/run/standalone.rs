//! The stand-alone stages on a flowsift output — `outliers`, `bulkflow`, `export` — each
//! with the cosmology and conventions of the input's record, writing its output with a
//! record that nests the input's.

use crate::catalogue::{read_table, write_table, ReadOptions, RunRecord, Table, WriteOptions};
use crate::flow::bulk_flow_report::BulkFlowReport;
use crate::flow::export::{export_table, ExportSummary};
use crate::flow::outliers::{OutlierResult, OutlierSettings};
use crate::physics::cosmology::{Cosmology, LengthUnit};
use crate::plan::StagePlan;

use super::cosmology_reaching;
use super::sample_stages::{add_outliers, bulk_flow_of_table};

pub(crate) fn read_input(plan: &StagePlan) -> Result<Table, super::RunError> {
    read_table(
        &plan.input,
        &ReadOptions {
            hdu: plan.config().input.hdu.clone(),
        },
    )
    .map_err(Into::into)
}

/// A distance table reaching past every z_cmb of the table.
pub(crate) fn cosmology_for(plan: &StagePlan, table: &Table) -> Result<Cosmology, super::RunError> {
    let z_top = crate::flow::sample::float_column(table, "z_cmb")
        .unwrap_or_default()
        .into_iter()
        .filter(|z| z.is_finite())
        .fold(0.0, f64::max);
    cosmology_reaching(plan.shared.cosmology.params, z_top)
}

/// The stage's record: the shared settings, the columns the input was made with, the
/// stage's own section.
pub(crate) fn stage_record(plan: &StagePlan, rows: usize) -> RunRecord {
    let mut r = plan.shared.record(
        &plan.step,
        &plan.command_line,
        &[("catalogue", plan.input.as_path())],
    );
    r.settings.columns = plan.config().columns.clone();
    r.settings.input = plan.config().input.clone();
    r.rows = Some(crate::catalogue::record::RowCounts {
        read: rows,
        ok: rows,
    });
    r.cautions = plan.shared.cautions();
    r
}

fn write(plan: &StagePlan, table: &Table, record: &RunRecord) -> Result<(), super::RunError> {
    let out = plan
        .output
        .as_ref()
        .ok_or("this stage needs an output (-o)")?;
    write_table(
        out,
        table,
        &record.to_provenance(),
        &WriteOptions {
            force: plan.force,
            protected: vec![plan.input.clone()],
        },
    )
    .map_err(Into::into)
}

/// `outliers`: the input plus `outlier` and `outlier_reason`.
pub fn run_outliers(
    plan: &StagePlan,
) -> Result<(OutlierResult, usize, Vec<String>), super::RunError> {
    let choice = plan.config().outliers.clone().unwrap_or_default();
    let settings = OutlierSettings::from_choice(&choice)?;
    let mut table = read_input(plan)?;
    let cosmology = cosmology_for(plan, &table)?;
    let r = add_outliers(&mut table, &cosmology, &settings)
        .map_err(|e| format!("{}: {e}", plan.input.display()))?;
    let mut record = stage_record(plan, table.frame.height());
    record.settings.outliers = Some(choice.filled());
    write(plan, &table, &record)?;
    Ok((r, table.frame.height(), record.cautions))
}

/// `bulkflow`: the ML bulk flow and its ΛCDM expectation; written as JSON (with the record)
/// when the plan names an output.
pub fn run_bulkflow(plan: &StagePlan) -> Result<(BulkFlowReport, Vec<String>), super::RunError> {
    let choice = plan.config().bulk_flow.clone().unwrap_or_default();
    let table = read_input(plan)?;
    let cosmology = cosmology_for(plan, &table)?;
    let report = bulk_flow_of_table(&table, &cosmology, &choice)
        .map_err(|e| format!("{}: {e}", plan.input.display()))?;
    let mut record = stage_record(plan, table.frame.height());
    record.settings.bulk_flow = Some(choice.filled());
    if let Some(out) = &plan.output {
        crate::catalogue::bulk_flow_file::write_bulk_flow(out, &report, &record, plan.force)?;
    }
    Ok((report, record.cautions))
}

/// `export`: the flow-sample table.
pub fn run_export(plan: &StagePlan) -> Result<(ExportSummary, Vec<String>), super::RunError> {
    let choice = plan.config().export.clone().unwrap_or_default();
    let table = read_input(plan)?;
    // The input's length unit: its record's, else the unit of its d_c column.
    let unit_h = match plan.config().conventions.length_unit {
        Some(u) => u == LengthUnit::MpcOverH,
        None => table.meta.get("d_c").and_then(|m| m.unit.as_deref()) == Some("Mpc/h"),
    };
    let (t, s) = export_table(
        &table,
        plan.shared.cosmology.params.little_h(),
        unit_h,
        choice.keep_outliers.unwrap_or(false),
    )
    .map_err(|e| format!("{}: {e}", plan.input.display()))?;
    let mut record = stage_record(plan, table.frame.height());
    record.settings.export = Some(crate::settings::ExportChoice {
        output: plan.output.as_ref().map(|p| p.display().to_string()),
        ..choice.filled()
    });
    record.details.insert(
        "export_rows".into(),
        format!(
            "{} of {} rows ({} not ok, {} outliers left out)",
            s.rows_out, s.rows_in, s.not_ok, s.outliers_left_out
        ),
    );
    write(plan, &t, &record)?;
    Ok((s, record.cautions))
}
