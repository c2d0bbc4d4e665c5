//! `flowsift._flowsift`: the flowsift library reached from Python. Options arrive as keyword
//! arguments and are parsed by the command line's own clap parsers ([`options`]); tables
//! arrive and leave through the Arrow C stream interface ([`stream`]); the work is the
//! library's, planned by the same resolver as the command line. The Python package
//! (`python/flowsift`) wraps these functions.

mod calls;
mod failure;
mod options;
mod stream;

use pyo3::prelude::*;

#[pymodule]
fn _flowsift(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(calls::velocities, m)?)?;
    m.add_function(wrap_pyfunction!(calls::galaxy, m)?)?;
    m.add_function(wrap_pyfunction!(calls::distances, m)?)?;
    m.add_function(wrap_pyfunction!(calls::option_names, m)?)?;
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    Ok(())
}
