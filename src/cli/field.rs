//! `flowsift field`: a velocity-field file from an analytic model (uniform flow plus linear
//! infall onto centres), sampled on a grid — for mocks, tests and the demo.

use std::path::PathBuf;

use anyhow::anyhow;
use clap::Args;

use flowsift::plan::{plan_field, FieldOrder};
use flowsift::run::generate::run_field;
use flowsift::settings::{InfallChoice, RunConfig};

use super::correct::{AxesArg, UnitArg};
use flowsift::flags::options::CosmologyFlags;

/// Sample an analytic velocity model onto a grid file.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  flowsift field -o flow.fits --uniform-flow 150,-200,80 --infall knot,40,60,-20,0.9,15 --cells 64 --spacing 8\n  flowsift field -o demo-data/lantern_field.fits --scenario lantern"
)]
pub struct FieldArgs {
    /// Output: our FITS field file (.fits, .fits.gz) or a table x, y, z, vx, vy, vz (.csv, .parquet).
    #[arg(short, long)]
    pub output: PathBuf,
    /// Start from a named scenario: lantern (the demo survey's flow).
    #[arg(long, value_name = "NAME")]
    pub scenario: Option<String>,
    /// Uniform flow, km/s, as VX,VY,VZ on the --axes.
    #[arg(
        long = "uniform-flow",
        value_name = "VX,VY,VZ",
        value_parser = flowsift::flags::options::parse_vector3,
        allow_hyphen_values = true
    )]
    pub uniform_flow: Option<[f64; 3]>,
    /// Linear infall onto a centre: NAME,X,Y,Z,DELTA0,R_SCALE; repeat for several.
    #[arg(long, value_name = "NAME,X,Y,Z,DELTA0,R", allow_hyphen_values = true)]
    pub infall: Vec<String>,
    /// Cells per axis (default 48; lantern: 26).
    #[arg(long, value_name = "N")]
    pub cells: Option<usize>,
    /// Cell size, in the length unit (default 18; lantern: 36).
    #[arg(long, value_name = "L")]
    pub spacing: Option<f64>,
    /// Axes: supergalactic (default) or galactic.
    #[arg(long = "axes", value_enum, value_name = "AXES")]
    pub axes: Option<AxesArg>,
    /// Length unit: mpc (default) or mpc-over-h.
    #[arg(long = "field-unit", value_enum, value_name = "UNIT")]
    pub field_unit: Option<UnitArg>,
    #[command(flatten)]
    pub cosmology: CosmologyFlags,
    /// Replace an existing output.
    #[arg(long)]
    pub force: bool,
}

pub fn run(a: FieldArgs) -> anyhow::Result<()> {
    let plan = plan_field(FieldOrder {
        output: a.output.clone(),
        scenario: a.scenario.clone(),
        bulk: a.uniform_flow,
        infall: a
            .infall
            .iter()
            .map(|s| InfallChoice::parse(s))
            .collect::<Result<_, _>>()
            .map_err(|e| anyhow!(e))?,
        cells: a.cells,
        spacing: a.spacing,
        axes: a.axes.map(AxesArg::axes),
        unit: a.field_unit.map(UnitArg::unit),
        flags: RunConfig {
            cosmology: a.cosmology.choice(),
            ..Default::default()
        },
        force: a.force,
    })
    .map_err(|e| anyhow!(e))?;
    let half = run_field(&plan).map_err(|e| anyhow!(e))?;
    println!(
        "wrote a {n}³ grid of {s} {u} cells ({} axes, ±{half} {u}) to {}",
        plan.axes.name(),
        a.output.display(),
        n = plan.cells,
        s = plan.spacing,
        u = plan.unit.label(),
    );
    Ok(())
}
