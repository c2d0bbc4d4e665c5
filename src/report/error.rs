//! What can stop a figure or the run report: a column of the table that is missing or of the
//! wrong kind, a drawing that fails, a file that cannot be read or written. Each prints as one
//! message naming the column or the file.

use std::path::PathBuf;

use thiserror::Error;

use crate::catalogue::CatalogueError;
use crate::physics::PhysicsError;

#[derive(Debug, Error)]
pub enum ReportError {
    /// A column the figures need is not in the table.
    #[error("no column {name}: is this a flowsift output table?")]
    MissingColumn { name: String },
    /// A column that cannot be read as what it should hold (numbers, text, flags).
    #[error("column {name}: {problem}")]
    Column { name: String, problem: String },
    /// The plotting backend failed.
    #[error("drawing failed: {0}")]
    Drawing(String),
    /// The bundled font could not be registered with the plotting backend.
    #[error("the bundled DejaVu Sans font could not be loaded")]
    Font,
    #[error("figure size {width}×{height} px is too small (at least 400×300)")]
    FigureSize { width: u32, height: u32 },
    #[error("unknown image type .{0} (use .png or .svg)")]
    ImageType(String),
    /// The cosmology of the Hubble diagram's model curve.
    #[error("model cosmology: {0}")]
    ModelCosmology(PhysicsError),
    /// A file or folder the report reads or creates (a figure to embed, the output folder).
    #[error("{}: {message}", path.display())]
    File { path: PathBuf, message: String },
    /// One figure or the report file that could not be made, with what went wrong.
    #[error("{}: {error}", path.display())]
    Output {
        path: PathBuf,
        error: Box<ReportError>,
    },
    /// The one atomic writer.
    #[error(transparent)]
    Catalogue(#[from] CatalogueError),
}

impl ReportError {
    pub(crate) fn file(path: &std::path::Path, message: impl Into<String>) -> Self {
        ReportError::File {
            path: path.to_path_buf(),
            message: message.into(),
        }
    }

    /// `error` as the failure of the output at `path`; an error that already names its
    /// file is kept as it is (one name in the message, not two).
    pub(crate) fn output(path: &std::path::Path, error: ReportError) -> Self {
        match error {
            e @ (ReportError::Catalogue(_)
            | ReportError::File { .. }
            | ReportError::Output { .. }) => e,
            e => ReportError::Output {
                path: path.to_path_buf(),
                error: Box::new(e),
            },
        }
    }

    pub(crate) fn column(name: &str, problem: impl Into<String>) -> Self {
        ReportError::Column {
            name: name.to_string(),
            problem: problem.into(),
        }
    }
}
