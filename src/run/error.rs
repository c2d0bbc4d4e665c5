//! What can stop a command once its plan is made: typed by layer (the plan, a file, the
//! physics, a sample stage, the report, or a stage's own message), each printing as one
//! message naming what went wrong and where.

use thiserror::Error;

use crate::catalogue::CatalogueError;
use crate::flow::FlowError;
use crate::physics::PhysicsError;
use crate::plan::PlanError;
use crate::report::ReportError;

#[derive(Debug, Error)]
pub enum RunError {
    #[error(transparent)]
    Plan(#[from] PlanError),
    #[error(transparent)]
    Catalogue(#[from] CatalogueError),
    #[error(transparent)]
    Physics(#[from] PhysicsError),
    #[error(transparent)]
    Flow(#[from] FlowError),
    #[error(transparent)]
    Report(#[from] ReportError),
    /// A step that could not finish, with its own message (the Malmquist profile, a velocity
    /// model, a group column, …).
    #[error("{0}")]
    Failed(String),
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
