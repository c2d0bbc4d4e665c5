//! The plan of a `velocities` run on a table already in memory (the Python package's
//! `velocities`): the same settling and checks as [`super::plan_velocities`], with the
//! input's record taken from the table's own metadata rather than from a file, and no file
//! read or written but the run file, the apex file and the Malmquist profile.

use std::path::PathBuf;

use crate::catalogue::{Format, Provenance, RunRecord};
use crate::settings::RunConfig;

use super::common::Shared;
use super::paths::Files;
use super::run_file::merge_run_file;
use super::velocities::{check_settings, VelocityPlan};

/// What the caller asked for, for a table in memory.
#[derive(Debug, Clone)]
pub struct InMemoryOrder {
    /// How the table is named in messages and in the record (e.g. "the Arrow table").
    pub name: String,
    /// The provenance entries the table's metadata carries (empty when none): a flowsift
    /// record among them is the input's record, as a file's would be.
    pub provenance: Provenance,
    /// Run file (TOML), merged under the flags.
    pub run_file: Option<PathBuf>,
    /// The flags as a run configuration.
    pub flags: RunConfig,
    /// Use settings that contradict the input's record.
    pub override_input_settings: bool,
    /// The call as made, for the record.
    pub command_line: String,
    /// The index, in the whole catalogue, of the table's first row (0 for a whole
    /// catalogue): Monte Carlo draws are seeded per row of the whole catalogue.
    pub first_row: u64,
}

/// Check the order and resolve it into a plan whose output is one table in memory (Arrow
/// holds every column Parquet holds, so the output is prepared as for Parquet).
pub fn plan_velocities_in_memory(order: InMemoryOrder) -> Result<VelocityPlan, super::PlanError> {
    let user = merge_run_file(order.run_file.as_deref(), &order.flags)?;
    let previous = RunRecord::from_provenance(&order.provenance)
        .map_err(|e| format!("{}: {e}", order.name))?;
    let shared =
        Shared::resolve_with_record(previous, &order.name, &user, order.override_input_settings)?;
    let cfg = &shared.config;
    let mut refused = vec![];
    if cfg.groups.is_some() {
        refused.push("groups (a group table of its own)");
    }
    if cfg.bulk_flow.is_some() {
        refused.push("the bulk flow (a report of its own)");
    }
    if cfg.export.is_some() {
        refused.push("the export (a table of its own)");
    }
    if !refused.is_empty() {
        return Err(format!(
            "{}: a run on a table in memory returns one table; {} cannot be part of it: run them with `flowsift velocities` on a file, or with `flowsift groups`, `bulkflow` or `export` on a saved result",
            order.name,
            refused.join(", ")
        )
        .into());
    }
    let (draws, outliers, profile) = check_settings(cfg)?;
    let mut files = Files::new();
    if let Some(p) = &order.run_file {
        files.read("run file", p);
    }
    if let Some(p) = &user.frame.apex_file {
        files.read("apex file", std::path::Path::new(p));
    }
    if let Some(p) = &profile {
        files.read("Malmquist profile", p);
    }
    files.check(false)?;
    Ok(VelocityPlan {
        input: PathBuf::from(&order.name),
        output: PathBuf::new(),
        output_format: Format::Parquet,
        force: false,
        command_line: order.command_line,
        step: "velocities".into(),
        run_file: order.run_file,
        draws,
        seed: cfg.errors.seed.unwrap_or(1),
        outliers,
        profile,
        groups_output: None,
        bulk_flow_output: None,
        export_output: None,
        partitioned: false,
        memory_limit: u64::MAX,
        first_row: order.first_row,
        shared,
    })
}
