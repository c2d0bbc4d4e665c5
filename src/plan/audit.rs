//! The plan of an `audit` run: the catalogue and the optional flagged copy checked as files,
//! the columns the user names to audit (`--check COLUMN[:QUANTITY]`) parsed, cosmology and
//! frames settled against the input's record. Columns are resolved by the run, against the
//! table, by the same rules as every other command (`plan::columns`).

use std::path::PathBuf;

use crate::audit::quantity::{by_name, Quantity};
use crate::settings::RunConfig;

use super::common::Shared;
use super::paths::Files;
use super::velocities::{format_of_output, table_output};

/// What the user asked for.
#[derive(Debug, Clone)]
pub struct AuditOrder {
    pub input: PathBuf,
    /// The catalogue with residual columns and `audit_flag`, if wanted.
    pub output: Option<PathBuf>,
    /// Columns, cosmology, frames, HDU.
    pub flags: RunConfig,
    /// `COLUMN` or `COLUMN:QUANTITY`, as given.
    pub checks: Vec<String>,
    /// Only the columns named by `checks`, no discovery.
    pub only_checks: bool,
    pub force: bool,
    pub override_input_settings: bool,
    pub command_line: String,
}

/// A checked `audit` run.
#[derive(Debug, Clone)]
pub struct AuditPlan {
    pub input: PathBuf,
    pub output: Option<PathBuf>,
    pub checks: Vec<(String, Quantity)>,
    pub discover: bool,
    pub force: bool,
    pub command_line: String,
    pub shared: Shared,
}

impl AuditPlan {
    pub fn config(&self) -> &RunConfig {
        &self.shared.config
    }
}

/// Check the order and resolve it; every problem is reported at once.
pub fn plan_audit(order: AuditOrder) -> Result<AuditPlan, super::PlanError> {
    let mut problems = vec![];
    let mut checks = vec![];
    for c in &order.checks {
        let (column, quantity) = match c.rsplit_once(':') {
            Some((col, q)) => (col.trim(), Quantity::parse(q).ok_or(q.trim())),
            None => (c.trim(), by_name(c.trim()).ok_or("")),
        };
        match quantity {
            Ok(q) if !column.is_empty() => checks.push((column.to_string(), q)),
            Ok(_) => problems.push(format!("--check '{c}': give a column name")),
            Err("") => problems.push(format!(
                "--check '{c}': the name does not say what the column holds; give COLUMN:QUANTITY with QUANTITY one of {}",
                crate::audit::quantity::QUANTITIES.map(|q| q.name()).join(", ")
            )),
            Err(q) => problems.push(format!(
                "--check '{c}': unknown quantity '{q}'; known: {}",
                crate::audit::quantity::QUANTITIES.map(|q| q.name()).join(", ")
            )),
        }
    }
    if order.only_checks && checks.is_empty() && problems.is_empty() {
        problems.push("--only-checked needs at least one --check COLUMN[:QUANTITY]".into());
    }
    if !problems.is_empty() {
        return Err(super::PlanError::Settings(problems.join("\n  ")));
    }
    let mut files = Files::new();
    files.read("catalogue", &order.input);
    if let Some(p) = &order.flags.frame.apex_file {
        files.read("apex file", std::path::Path::new(p));
    }
    if let Some(o) = &order.output {
        format_of_output(o)?;
        table_output(&mut files, "flagged catalogue", o);
    }
    files.check(order.force)?;
    let shared = Shared::resolve(
        Some(&order.input),
        order.flags.input.hdu.as_deref(),
        &order.flags,
        order.override_input_settings,
    )?;
    Ok(AuditPlan {
        input: order.input,
        output: order.output,
        checks,
        discover: !order.only_checks,
        force: order.force,
        command_line: order.command_line,
        shared,
    })
}
