//! The functions Python calls: each parses its keyword arguments with the command line's
//! parser, plans with the library's resolver and runs the library's code, without the GIL
//! and on a rayon pool of `threads` threads when given.

use clap::Parser;
use pyo3::prelude::*;
use pyo3::types::{PyCapsule, PyDict};

use flowsift::catalogue::arrow::{table_from_arrow, table_to_arrow};
use flowsift::flags::distances::DistancesArgs;
use flowsift::flags::galaxy::GalaxyArgs;
use flowsift::flags::velocities::VelocityFlags;
use flowsift::plan::galaxy::plan_galaxy;
use flowsift::plan::{plan_velocities_in_memory, InMemoryOrder};
use flowsift::run::distances::{distance_table, distances_json};
use flowsift::run::galaxy::{galaxy_json, run_galaxy};
use flowsift::run::velocities_in_memory;

use crate::failure::contained;
use crate::options;

/// The flags of `flowsift velocities` that say how, without the files.
#[derive(Debug, Parser)]
#[command(name = "flowsift.velocities")]
struct VelocityCall {
    #[command(flatten)]
    flags: VelocityFlags,
}

/// The flags of `flowsift galaxy`.
#[derive(Debug, Parser)]
#[command(name = "flowsift.galaxy")]
struct GalaxyCall {
    #[command(flatten)]
    args: GalaxyArgs,
}

/// The flags of `flowsift distances`.
#[derive(Debug, Parser)]
#[command(name = "flowsift.distances")]
struct DistancesCall {
    #[command(flatten)]
    args: DistancesArgs,
}

/// Flags of the command line that have no meaning for a call (its output is the return
/// value).
const NOT_OPTIONS: &[&str] = &["json"];

/// How the table appears in messages and in the record.
const TABLE_NAME: &str = "the input table";

/// Run `work` on a pool of `threads` threads (rayon's global pool when `None`).
fn on_pool<T: Send>(
    threads: Option<usize>,
    work: impl FnOnce() -> Result<T, String> + Send,
) -> Result<T, String> {
    match threads {
        None => work(),
        Some(0) => Err("threads must be at least 1".into()),
        Some(n) => rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build()
            .map_err(|e| format!("cannot start {n} threads: {e}"))?
            .install(work),
    }
}

/// `flowsift velocities` on an Arrow stream: the output as an Arrow stream capsule.
#[pyfunction]
#[pyo3(signature = (table, options, row_offset = 0, threads = None))]
pub fn velocities<'py>(
    py: Python<'py>,
    table: &Bound<'py, PyAny>,
    options: Option<&Bound<'py, PyDict>>,
    row_offset: u64,
    threads: Option<usize>,
) -> PyResult<Bound<'py, PyCapsule>> {
    let (call, argv) =
        options::parse::<VelocityCall>("flowsift.velocities", options, NOT_OPTIONS, vec![])?;
    let (field, batches) = crate::stream::import(table)?;
    let flags = call.flags;
    let command_line = format!("flowsift.velocities {}", argv.join(" "));
    let (field, batches) = py.detach(move || {
        contained("flowsift.velocities", move || {
            on_pool(threads, move || {
                let (table, provenance) =
                    table_from_arrow(&field, batches).map_err(|e| format!("{TABLE_NAME}: {e}"))?;
                let plan = plan_velocities_in_memory(InMemoryOrder {
                    name: TABLE_NAME.into(),
                    provenance,
                    run_file: flags.config.clone(),
                    flags: flags.flags_config(None),
                    override_input_settings: flags.override_input_settings,
                    command_line,
                    first_row: row_offset,
                })
                .map_err(|e| e.to_string())?;
                let (out, provenance) =
                    velocities_in_memory(&plan, table, &|_, _| {}).map_err(|e| e.to_string())?;
                table_to_arrow(&out, &provenance).map_err(|e| format!("{TABLE_NAME}: {e}"))
            })
        })
    })?;
    crate::stream::export(py, field, batches)
}

/// `flowsift galaxy --json` as text.
#[pyfunction]
#[pyo3(signature = (options))]
pub fn galaxy(py: Python<'_>, options: Option<&Bound<'_, PyDict>>) -> PyResult<String> {
    let (call, _) = options::parse::<GalaxyCall>("flowsift.galaxy", options, NOT_OPTIONS, vec![])?;
    py.detach(move || {
        contained("flowsift.galaxy", move || -> Result<String, String> {
            let order = call.args.order()?;
            let plan = plan_galaxy(order).map_err(|e| e.to_string())?;
            let report = run_galaxy(&plan).map_err(|e| e.to_string())?;
            Ok(galaxy_json(&plan, &report).to_string())
        })
    })
}

/// `flowsift distances --json` as text, at the redshifts `z`.
#[pyfunction]
#[pyo3(signature = (z, options))]
pub fn distances(
    py: Python<'_>,
    z: Vec<f64>,
    options: Option<&Bound<'_, PyDict>>,
) -> PyResult<String> {
    let zs: Vec<String> = z.iter().map(|v| v.to_string()).collect();
    let (call, _) = options::parse::<DistancesCall>(
        "flowsift.distances",
        options,
        &["json", "z"],
        vec![format!("--z={}", zs.join(","))],
    )?;
    py.detach(move || {
        contained("flowsift.distances", move || -> Result<String, String> {
            let shared = call.args.shared().map_err(|e| e.to_string())?;
            let rows = distance_table(&call.args.z, &shared).map_err(|e| e.to_string())?;
            Ok(distances_json(&rows).to_string())
        })
    })
}

/// The sample stages of `velocities` that need the whole sample, and the headings of their
/// flags: a piece of a catalogue cannot run them.
const WHOLE_SAMPLE: &[&str] = &[
    "outliers",
    "bulk_flow",
    "groups",
    "central_column",
    "groups_out",
    "export",
];
const WHOLE_SAMPLE_HEADINGS: &[&str] = &["Outliers", "Bulk flow"];

/// The keyword options a function accepts (for the Dask wrapper and for help);
/// "velocities-whole-sample": those of `velocities` that need the whole sample.
#[pyfunction]
pub fn option_names(function: &str) -> PyResult<Vec<String>> {
    match function {
        "velocities" => Ok(options::names::<VelocityCall>(NOT_OPTIONS, None)),
        "velocities-whole-sample" => {
            let mut v = options::names::<VelocityCall>(NOT_OPTIONS, Some(WHOLE_SAMPLE_HEADINGS));
            v.extend(WHOLE_SAMPLE.iter().map(|s| s.to_string()));
            v.sort();
            Ok(v)
        }
        "galaxy" => Ok(options::names::<GalaxyCall>(NOT_OPTIONS, None)),
        "distances" => Ok(options::names::<DistancesCall>(&["json", "z"], None)),
        other => Err(pyo3::exceptions::PyValueError::new_err(format!(
            "no flowsift function '{other}'"
        ))),
    }
}
