//! What can stop a command once its plan is made: typed by layer (the plan, a file, the
//! physics, a stage), each printing as one message naming what went wrong and where.

use thiserror::Error;

use crate::catalogue::CatalogueError;
use crate::physics::PhysicsError;
use crate::plan::PlanError;

#[derive(Debug, Error)]
pub enum RunError {
    #[error(transparent)]
    Plan(#[from] PlanError),
    #[error(transparent)]
    Catalogue(#[from] CatalogueError),
    #[error(transparent)]
    Physics(#[from] PhysicsError),
    /// A stage that could not finish (a column missing from a flowsift output, a singular
    /// fit, …), with the message of the layer that found it.
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
