//! What can stop a command once its plan is made: typed by layer (the plan, a file, the
//! settings, the input columns, the physics, a sample stage, the report, or a step's own
//! message), each printing as one message naming what went wrong and where.

use std::path::{Path, PathBuf};

use thiserror::Error;

use crate::catalogue::CatalogueError;
use crate::flow::FlowError;
use crate::physics::PhysicsError;
use crate::pipeline::InputError;
use crate::plan::{ColumnError, PlanError};
use crate::report::ReportError;
use crate::settings::SettingsError;

#[derive(Debug, Error)]
pub enum RunError {
    #[error(transparent)]
    Plan(#[from] PlanError),
    #[error(transparent)]
    Catalogue(#[from] CatalogueError),
    #[error(transparent)]
    Physics(#[from] PhysicsError),
    #[error(transparent)]
    Settings(#[from] SettingsError),
    #[error(transparent)]
    Columns(#[from] ColumnError),
    #[error(transparent)]
    Input(#[from] InputError),
    #[error(transparent)]
    Flow(#[from] FlowError),
    #[error(transparent)]
    Report(#[from] ReportError),
    /// A step that could not finish, with its own message (the Malmquist profile, a velocity
    /// model, a group column, …).
    #[error("{0}")]
    Failed(String),
    /// Any of these about one input file, named first.
    #[error("{}: {error}", path.display())]
    InFile { path: PathBuf, error: Box<RunError> },
}

impl RunError {
    pub(crate) fn in_file(path: &Path, error: RunError) -> Self {
        RunError::InFile {
            path: path.to_path_buf(),
            error: Box::new(error),
        }
    }
}

impl From<String> for RunError {
    fn from(message: String) -> Self {
        RunError::Failed(message)
    }
}

impl From<&str> for RunError {
    fn from(message: &str) -> Self {
        RunError::Failed(message.to_string())
    }
}
