//! `flowsift field`: a velocity-field file from an analytic model (uniform flow plus linear
//! infall onto centres), sampled on a grid — for mocks, tests and the demo.

use std::path::PathBuf;

use anyhow::anyhow;
use clap::Args;

use flowsift::catalogue::field_io::{write_field_fits, write_field_table};
use flowsift::catalogue::Format;
use flowsift::physics::cosmology::LengthUnit;
use flowsift::physics::field::{hubble_per_length, AnalyticField, FieldAxes};
use flowsift::physics::power::growth_rate;
use flowsift::physics::sky::SkyRotations;

use super::correct::{parse_infall, AxesArg, UnitArg};
use super::options::CosmologyFlags;

/// Sample an analytic velocity model onto a grid file.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  flowsift field -o flow.fits --bulk 150,-200,80 --infall knot,40,60,-20,0.9,15 --cells 64 --spacing 8\n  flowsift field -o demo-data/lantern_field.fits --scenario lantern"
)]
pub struct FieldArgs {
    /// Output: our FITS field file (.fits, .fits.gz) or a table x, y, z, vx, vy, vz (.csv, .parquet).
    #[arg(short, long)]
    pub output: PathBuf,
    /// Start from a named scenario: lantern (the demo survey's flow).
    #[arg(long, value_name = "NAME")]
    pub scenario: Option<String>,
    /// Uniform flow, km/s, on the field axes.
    #[arg(
        long,
        value_name = "VX,VY,VZ",
        value_parser = super::options::parse_vector3,
        allow_hyphen_values = true
    )]
    pub bulk: Option<[f64; 3]>,
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
    #[arg(long = "field-axes", value_enum, value_name = "AXES")]
    pub field_axes: Option<AxesArg>,
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
    let params = a
        .cosmology
        .choice()
        .resolve()
        .map_err(|e| anyhow!(e))?
        .params;
    let axes = match a.field_axes {
        Some(AxesArg::Galactic) => FieldAxes::Galactic,
        _ => FieldAxes::Supergalactic,
    };
    let unit = match a.field_unit {
        Some(UnitArg::MpcOverH) => LengthUnit::MpcOverH,
        _ => LengthUnit::Mpc,
    };
    let mut bulk = a
        .bulk
        .as_ref()
        .map(|b| [b[0], b[1], b[2]])
        .unwrap_or([0.0; 3]);
    let (mut cells, mut spacing) = (48, 18.0);
    match a.scenario.as_deref() {
        Some("lantern") => {
            // The demo survey's flow, given in Galactic axes by the mock spec; a uniform flow
            // interpolates exactly, so a coarse grid reaching past z = 0.1 will do.
            let g = flowsift::mock::MockSpec::demo_survey().bulk_flow;
            bulk = axes.from_galactic(&SkyRotations::default(), g);
            (cells, spacing) = (26, 36.0);
        }
        Some(other) => return Err(anyhow!("unknown scenario '{other}'; known: lantern")),
        None => {}
    }
    if a.output.exists() && !a.force {
        return Err(anyhow!(
            "{}: output exists; pass --force to replace it",
            a.output.display()
        ));
    }
    let centres = a
        .infall
        .iter()
        .map(|s| parse_infall(s))
        .collect::<anyhow::Result<Vec<_>>>()?;
    let model = AnalyticField {
        bulk,
        centres,
        growth_rate: growth_rate(params.omega_m, params.omega_de, 0.0),
        h0_km_s_per_length: hubble_per_length(&params, unit),
        axes,
        length_unit: unit,
    };
    let n = a.cells.unwrap_or(cells);
    let s = a.spacing.unwrap_or(spacing);
    if n < 2 || !(s.is_finite() && s > 0.0) {
        return Err(anyhow!("--cells must be at least 2 and --spacing positive"));
    }
    let half = 0.5 * (n as f64 - 1.0) * s;
    let grid = model
        .sample([-half; 3], s, [n; 3])
        .map_err(|e| anyhow!("{e}"))?;
    if a.output.exists() {
        std::fs::remove_file(&a.output)?;
    }
    match Format::from_path(&a.output)? {
        Format::Fits => write_field_fits(&a.output, &grid)?,
        _ => write_field_table(
            &a.output,
            &grid,
            &flowsift::catalogue::WriteOptions {
                force: a.force,
                protected: vec![],
            },
        )?,
    }
    println!(
        "wrote a {n}³ grid of {s} {} cells ({} axes, ±{half} {}) to {}",
        unit.label(),
        axes.name(),
        unit.label(),
        a.output.display()
    );
    Ok(())
}
