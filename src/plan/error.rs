//! What can stop a plan before any work: typed, so that callers (the command line, the
//! Python interface) can tell a contradiction of the input's record from a file problem or
//! a setting out of range; each prints as one clear message.

use thiserror::Error;

use crate::catalogue::CatalogueError;
use crate::settings::SettingsError;

#[derive(Debug, Error)]
pub enum PlanError {
    /// Flags or run-file keys that contradict the settings recorded with a flowsift input.
    #[error("{input} is the output of `flowsift {step}`, and these settings contradict the ones it was made with:\n  {}\nleave them out to use the recorded ones, or pass --override-input-settings to use yours (the output then records both)", conflicts.join("\n  "))]
    ContradictsInput {
        input: String,
        step: String,
        conflicts: Vec<String>,
    },
    /// Files that cannot be read or written as asked (missing, an output that is an input,
    /// an existing output without --force).
    #[error("{}", problems.join("\n  "))]
    Files { problems: Vec<String> },
    /// Columns that cannot be mapped to their roles (every problem at once).
    #[error(transparent)]
    Columns(#[from] ColumnError),
    /// A choice that does not resolve: an unknown preset or apex, an invalid cosmology, a run
    /// file that does not parse.
    #[error(transparent)]
    Resolve(#[from] SettingsError),
    /// The input's record (or another file the plan reads) could not be read.
    #[error(transparent)]
    Catalogue(#[from] CatalogueError),
    /// A setting out of range or inconsistent (cosmology, frames, counts, stage settings).
    #[error("{0}")]
    Settings(String),
}

/// Why the columns of a table cannot be mapped to their roles (RA, Dec, redshift, distance,
/// errors, group): every problem found, with the file's columns listed.
#[derive(Debug, Error)]
pub enum ColumnError {
    #[error("{}\n  columns in the file: {}", problems.join("\n  "), columns.join(", "))]
    Problems {
        problems: Vec<String>,
        columns: Vec<String>,
    },
    /// A role left without a column although no problem was reported (a defect).
    #[error("{0}")]
    Unresolved(&'static str),
}

impl From<String> for PlanError {
    fn from(message: String) -> Self {
        PlanError::Settings(message)
    }
}

impl From<&str> for PlanError {
    fn from(message: &str) -> Self {
        PlanError::Settings(message.to_string())
    }
}
