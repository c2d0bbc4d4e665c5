//! What can stop a sample-level stage: a column missing from (or unreadable in) a flowsift
//! output, a stage setting out of range, a fit that cannot be made. Each prints as one
//! message naming the column, the setting or the fit.

use thiserror::Error;

#[derive(Debug, Error)]
pub enum FlowError {
    /// A column the stage needs is not in the table; `columns` lists the ones that are.
    #[error("no column {name}; is this a flowsift output? columns: {}", columns.join(", "))]
    NotFlowsiftOutput { name: String, columns: Vec<String> },
    /// A text column the stage needs is not in the table.
    #[error("no column {name}")]
    MissingColumn { name: String },
    /// A column that cannot be read as what it should hold.
    #[error("column {name}: {problem}")]
    Column { name: String, problem: String },
    /// One row that cannot be used (a position off the sphere, …).
    #[error("row {row}: {problem}")]
    Row { row: usize, problem: String },
    /// A stage setting out of range (outlier thresholds, the ΛCDM power spectrum).
    #[error("{0}")]
    Settings(String),
    /// A fit or a search that cannot be made on this sample (too few objects, a singular
    /// covariance, …), with the message of the method.
    #[error("{0}")]
    Fit(String),
    /// The table the stage builds could not be assembled.
    #[error("{0}")]
    Table(String),
}

impl FlowError {
    pub(crate) fn column(name: &str, problem: impl std::fmt::Display) -> Self {
        FlowError::Column {
            name: name.to_string(),
            problem: problem.to_string(),
        }
    }
}
