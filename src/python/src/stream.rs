//! The Arrow C stream interface (Apache Arrow, "The Arrow C stream interface"; the PyCapsule
//! protocol names the capsule "arrow_array_stream"): a table in from any object with
//! `__arrow_c_stream__`, a table out as a capsule pyarrow imports. Column buffers are shared,
//! not copied; the library turns the stream's field and batches into its table and back
//! (`flowsift::catalogue::arrow`).

use std::ffi::CStr;

use polars_arrow::array::Array;
use polars_arrow::datatypes::Field;
use polars_arrow::ffi::{export_iterator, ArrowArrayStream, ArrowArrayStreamReader};
use pyo3::exceptions::{PyTypeError, PyValueError};
use pyo3::prelude::*;
use pyo3::types::PyCapsule;

const STREAM: &CStr = c"arrow_array_stream";

/// The stream's field and all its batches, read from `table.__arrow_c_stream__()`.
pub fn import(table: &Bound<'_, PyAny>) -> PyResult<(Field, Vec<Box<dyn Array>>)> {
    if !table.hasattr("__arrow_c_stream__")? {
        return Err(PyTypeError::new_err(format!(
            "flowsift.velocities() needs a table offering the Arrow C stream interface (a pyarrow.Table, a pandas or polars DataFrame), not {}",
            table.get_type().name()?
        )));
    }
    let capsule = table.call_method0("__arrow_c_stream__")?;
    let capsule = capsule
        .cast::<PyCapsule>()
        .map_err(|_| PyTypeError::new_err("__arrow_c_stream__() did not return a PyCapsule"))?;
    let pointer = capsule
        .pointer_checked(Some(STREAM))?
        .cast::<ArrowArrayStream>();
    // SAFETY: the capsule's name promises an ArrowArrayStream; it is moved out and the
    // capsule's own is left released (as the protocol asks of a consumer), so the producer's
    // release runs once, when the reader is dropped.
    let stream = unsafe { std::ptr::replace(pointer.as_ptr(), ArrowArrayStream::empty()) };
    // SAFETY: a stream from __arrow_c_stream__ follows the C stream interface.
    let mut reader =
        unsafe { ArrowArrayStreamReader::try_new(Box::new(stream)) }.map_err(stream_error)?;
    let field = reader.field().clone();
    let mut batches = vec![];
    // SAFETY: as above, its arrays follow the C data interface.
    while let Some(batch) = unsafe { reader.next() } {
        batches.push(batch.map_err(stream_error)?);
    }
    Ok((field, batches))
}

fn stream_error(e: impl std::fmt::Display) -> PyErr {
    PyValueError::new_err(format!("the table's Arrow stream: {e}"))
}

/// A capsule holding a stream of `batches` of type `field`.
pub fn export<'py>(
    py: Python<'py>,
    field: Field,
    batches: Vec<Box<dyn Array>>,
) -> PyResult<Bound<'py, PyCapsule>> {
    let stream = export_iterator(Box::new(batches.into_iter().map(Ok)), field);
    PyCapsule::new_with_value(py, stream, STREAM)
}
