//! The plan of a stand-alone stage on a flowsift output (`outliers`, `bulkflow`, `export`,
//! `plot`): the cosmology, frames, conventions and columns of the input's record, the
//! user's stage settings, and the files checked.

use std::path::PathBuf;

use crate::settings::RunConfig;

use super::common::Shared;
use super::paths::Files;
use super::velocities::table_output;

/// What the user asked for.
#[derive(Debug, Clone)]
pub struct StageOrder {
    /// `outliers`, `bulkflow`, `export` or `plot`.
    pub step: String,
    pub input: PathBuf,
    /// A table output (outliers, export), a JSON file (bulkflow), or none.
    pub output: Option<PathBuf>,
    /// Other files the stage writes (figures, the report).
    pub other_outputs: Vec<(String, PathBuf)>,
    /// Other files the stage reads (a bulk-flow JSON for `plot`).
    pub other_inputs: Vec<(String, PathBuf)>,
    /// Flags: cosmology, conventions and the stage's own section.
    pub flags: RunConfig,
    pub force: bool,
    pub override_input_settings: bool,
    pub command_line: String,
}

/// A checked stand-alone stage.
#[derive(Debug, Clone)]
pub struct StagePlan {
    pub step: String,
    pub input: PathBuf,
    pub output: Option<PathBuf>,
    pub force: bool,
    pub command_line: String,
    pub shared: Shared,
}

impl StagePlan {
    /// The run's settings (record and flags settled).
    pub fn config(&self) -> &RunConfig {
        &self.shared.config
    }
}

/// Check the order and resolve it.
pub fn plan_stage(order: StageOrder) -> Result<StagePlan, super::PlanError> {
    let mut files = Files::new();
    files.read("catalogue", &order.input);
    for (role, p) in &order.other_inputs {
        files.read(role, p);
    }
    if let Some(p) = &order.flags.frame.apex_file {
        files.read("apex file", std::path::Path::new(p));
    }
    if let Some(o) = &order.output {
        if o.extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("json"))
        {
            files.write("output", o);
        } else {
            super::velocities::format_of_output(o)?;
            table_output(&mut files, "output", o);
        }
    }
    for (role, p) in &order.other_outputs {
        files.write(role, p);
    }
    files.check(order.force)?;
    let shared = Shared::resolve(
        Some(&order.input),
        order.flags.input.hdu.as_deref(),
        &order.flags,
        order.override_input_settings,
    )?;
    Ok(StagePlan {
        step: order.step,
        input: order.input,
        output: order.output,
        force: order.force,
        command_line: order.command_line,
        shared,
    })
}
