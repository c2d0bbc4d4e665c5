//! Errors and panics as Python exceptions: the library's errors, which say what went wrong
//! and where, become `ValueError`; a panic (a bug) becomes `RuntimeError` saying so, never
//! an abort of the interpreter.

use std::panic::{catch_unwind, AssertUnwindSafe};

use pyo3::exceptions::{PyRuntimeError, PyValueError};
use pyo3::PyErr;

/// Run `work`, turning its error into a `ValueError` and a panic into a `RuntimeError`.
pub fn contained<T, E: std::fmt::Display>(
    function: &str,
    work: impl FnOnce() -> Result<T, E>,
) -> Result<T, PyErr> {
    match catch_unwind(AssertUnwindSafe(work)) {
        Ok(Ok(value)) => Ok(value),
        Ok(Err(e)) => Err(PyValueError::new_err(e.to_string())),
        Err(panic) => {
            let what = panic
                .downcast_ref::<String>()
                .cloned()
                .or_else(|| panic.downcast_ref::<&str>().map(|s| s.to_string()))
                .unwrap_or_else(|| "no message".into());
            Err(PyRuntimeError::new_err(format!(
                "{function}(): internal error (a bug; please report it with the call): {what}"
            )))
        }
    }
}
