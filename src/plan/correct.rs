//! The plan of a `correct` run: positions and redshifts found like every catalogue command
//! finds them, the velocity model's files named, cosmology and frames settled against the
//! input's record, every file checked.

use std::path::PathBuf;

use crate::settings::{ModelChoice, RunConfig};

use super::common::Shared;
use super::paths::Files;
use super::velocities::{format_of_output, table_output};

/// What the user asked for.
#[derive(Debug, Clone)]
pub struct CorrectOrder {
    pub input: PathBuf,
    pub output: PathBuf,
    /// Columns, cosmology, frames, conventions, HDU.
    pub flags: RunConfig,
    pub model: ModelChoice,
    pub force: bool,
    pub override_input_settings: bool,
    pub command_line: String,
}

/// A checked `correct` run.
#[derive(Debug, Clone)]
pub struct CorrectPlan {
    pub input: PathBuf,
    pub output: PathBuf,
    pub force: bool,
    pub command_line: String,
    pub shared: Shared,
    pub model: ModelChoice,
}

impl CorrectPlan {
    pub fn config(&self) -> &RunConfig {
        &self.shared.config
    }

    /// The files read, by role, the catalogue first.
    pub fn inputs(&self) -> Vec<(&'static str, std::path::PathBuf)> {
        let mut v = vec![("catalogue", self.input.clone())];
        if let Some(p) = &self.model.field {
            v.push(("velocity field", PathBuf::from(p)));
        }
        if let Some(p) = &self.model.density {
            v.push(("density grid", PathBuf::from(p)));
        }
        v
    }
}

/// Check the order and resolve it.
pub fn plan_correct(order: CorrectOrder) -> Result<CorrectPlan, super::PlanError> {
    if order.model.is_empty() {
        return Err("give a velocity model: --field FILE, --density FILE, --uniform-flow VX,VY,VZ, --infall … or --external VX,VY,VZ".into());
    }
    if let Some(s) = order.model.sigma_v {
        if !(s.is_finite() && s >= 0.0) {
            return Err(format!("--sigma-v must be a non-negative speed, got {s}").into());
        }
    }
    format_of_output(&order.output)?;
    let mut files = Files::new();
    files.read("catalogue", &order.input);
    if let Some(p) = &order.model.field {
        files.read("velocity field", std::path::Path::new(p));
    }
    if let Some(p) = &order.model.density {
        files.read("density grid", std::path::Path::new(p));
    }
    if let Some(p) = &order.flags.frame.apex_file {
        files.read("apex file", std::path::Path::new(p));
    }
    table_output(&mut files, "output", &order.output);
    files.check(order.force)?;
    let shared = Shared::resolve(
        Some(&order.input),
        order.flags.input.hdu.as_deref(),
        &order.flags,
        order.override_input_settings,
    )?;
    Ok(CorrectPlan {
        input: order.input,
        output: order.output,
        force: order.force,
        command_line: order.command_line,
        shared,
        model: order.model,
    })
}
