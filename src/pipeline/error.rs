//! What can stop the extraction of the input columns: a whole column that cannot be right
//! (its type, its unit). Problems of single rows go into the row status instead.

use thiserror::Error;

#[derive(Debug, Error)]
pub enum InputError {
    /// A column that cannot be read (absent, or not convertible).
    #[error("column {name}: {problem}")]
    Column { name: String, problem: String },
    #[error("column {name} holds numbers, but the angle unit is sexagesimal; use --angle-unit deg or rad")]
    NumbersGivenAsSexagesimal { name: String },
    #[error("column {name} has type {found}; expected numbers")]
    NotNumbers { name: String, found: String },
    /// The cz guard: a redshift column whose values are c·z in km/s.
    #[error("column {name} looks like c·z in km/s (median |value| {median:.4}), not a redshift; pass --z-unit cz")]
    LooksLikeVelocity { name: String, median: f64 },
    /// The cz guard the other way: a cz column whose values are redshifts.
    #[error("column {name} looks like a redshift (median |value| {median:.4}), not c·z in km/s; pass --z-unit z")]
    LooksLikeRedshift { name: String, median: f64 },
}

impl InputError {
    pub(crate) fn column(name: &str, problem: impl std::fmt::Display) -> Self {
        InputError::Column {
            name: name.to_string(),
            problem: problem.to_string(),
        }
    }
}
