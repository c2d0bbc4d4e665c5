//! `flowsift correct`: Hubble-diagram redshifts corrected with a velocity-field model.

use std::path::PathBuf;

use anyhow::anyhow;
use clap::{Args, ValueEnum};

use flowsift::plan::{plan_correct, CorrectOrder};
use flowsift::run::hubble_correction::run_correct;
use flowsift::settings::{
    DensityBoundary, FieldAxes, InfallChoice, InputChoice, LengthUnit, ModelChoice, RunConfig,
};

use flowsift::flags::options::{ConventionFlags, CosmologyFlags, FrameFlags, SkyRedshiftFlags};

/// Correct redshifts for the peculiar velocities a model predicts.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  flowsift correct sne.csv --field flow.fits -o sne_corrected.csv --beta 0.43 --sigma-v 250\n  flowsift correct sne.csv -o out.parquet --uniform-flow 150,-200,80 --infall cluster,-30,20,5,0.8,8"
)]
pub struct CorrectArgs {
    /// Catalogue with positions and redshifts (ra, dec and z_helio or cz_helio by default;
    /// UCDs and unit cards are used as for `velocities`).
    pub input: PathBuf,
    /// Output (format by extension).
    #[arg(short, long)]
    pub output: PathBuf,
    #[command(flatten)]
    pub model: ModelFlags,
    /// FITS extension to read, by EXTNAME or index.
    #[arg(long, value_name = "NAME|INDEX")]
    pub hdu: Option<String>,
    #[command(flatten)]
    pub columns: SkyRedshiftFlags,
    #[command(flatten)]
    pub cosmology: CosmologyFlags,
    #[command(flatten)]
    pub frame: FrameFlags,
    #[command(flatten)]
    pub conventions: ConventionFlags,
    /// Use settings that contradict the ones recorded with a flowsift input.
    #[arg(long = "override-input-settings")]
    pub override_input_settings: bool,
    /// Replace an existing output.
    #[arg(long)]
    pub force: bool,
}

/// Velocity-model flags, shared by `correct` and `mock`.
#[derive(Debug, Clone, Default, Args)]
pub struct ModelFlags {
    /// Velocity grid: our FITS field file (VX, VY, VZ images) or a table x, y, z, vx, vy, vz.
    #[arg(long, value_name = "FIELD")]
    pub field: Option<PathBuf>,
    /// Density-contrast grid (a FITS DELTA image with the field file's geometry cards, or a
    /// table x, y, z, delta on a regular grid), turned into linear-theory velocities by FFT.
    #[arg(long, value_name = "FILE", conflicts_with = "field")]
    pub density: Option<PathBuf>,
    /// Outside the density grid: isolated (δ = 0 beyond the grid, for a survey
    /// reconstruction; default) or periodic (the grid is a periodic box, for a simulation).
    #[arg(
        long = "density-boundary",
        value_enum,
        value_name = "BOUNDARY",
        requires = "density"
    )]
    pub density_boundary: Option<BoundaryArg>,
    /// --density holds a matter density contrast: velocities with this growth rate f
    /// (default, when neither this nor --beta is given: Ω_m^0.55 of the cosmology).
    #[arg(long = "growth-rate", value_name = "F", requires = "density")]
    pub growth_rate: Option<f64>,
    /// Cartesian axes of the vector flags and of a model file that does not say its own:
    /// supergalactic (default) or galactic.
    #[arg(long = "axes", value_enum, value_name = "AXES")]
    pub axes: Option<AxesArg>,
    /// Length unit of the model's coordinates (when the file does not say): mpc or mpc-over-h.
    #[arg(long = "field-unit", value_enum, value_name = "UNIT")]
    pub field_unit: Option<UnitArg>,
    /// Analytic uniform flow, km/s, as VX,VY,VZ on the --axes.
    #[arg(
        long = "uniform-flow",
        value_name = "VX,VY,VZ",
        value_parser = flowsift::flags::options::parse_vector3,
        allow_hyphen_values = true
    )]
    pub uniform_flow: Option<[f64; 3]>,
    /// Analytic linear infall onto a centre: NAME,X,Y,Z,DELTA0,R_SCALE (positions in the model
    /// length unit); repeat for several centres.
    #[arg(long, value_name = "NAME,X,Y,Z,DELTA0,R", allow_hyphen_values = true)]
    pub infall: Vec<String>,
    /// Scale of the model velocities (default 1). With --density, the grid is a galaxy
    /// density contrast and β = f/b is its only scale (no growth rate inside).
    #[arg(long, value_name = "B", allow_negative_numbers = true)]
    pub beta: Option<f64>,
    /// External dipole V_ext added to the model, km/s, as VX,VY,VZ on the --axes.
    #[arg(
        long,
        value_name = "VX,VY,VZ",
        value_parser = flowsift::flags::options::parse_vector3,
        allow_hyphen_values = true
    )]
    pub external: Option<[f64; 3]>,
    /// Residual velocity dispersion about the model, km/s (default 250, common practice).
    #[arg(long = "sigma-v", value_name = "KM_S", allow_negative_numbers = true)]
    pub sigma_v: Option<f64>,
}

impl ModelFlags {
    /// The flags as a model choice.
    pub fn choice(&self) -> anyhow::Result<ModelChoice> {
        Ok(ModelChoice {
            field: self.field.as_ref().map(|p| p.display().to_string()),
            density: self.density.as_ref().map(|p| p.display().to_string()),
            density_boundary: self.density_boundary.map(|b| match b {
                BoundaryArg::Isolated => DensityBoundary::Isolated,
                BoundaryArg::Periodic => DensityBoundary::Periodic,
            }),
            growth_rate: self.growth_rate,
            field_axes: self.axes.map(AxesArg::axes),
            field_unit: self.field_unit.map(UnitArg::unit),
            bulk: self.uniform_flow,
            infall: self
                .infall
                .iter()
                .map(|s| InfallChoice::parse(s))
                .collect::<Result<_, _>>()
                .map_err(|e| anyhow!(e))?,
            beta: self.beta,
            external: self.external,
            sigma_v: self.sigma_v,
        })
    }
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum BoundaryArg {
    Isolated,
    Periodic,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum AxesArg {
    Supergalactic,
    Galactic,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum UnitArg {
    Mpc,
    MpcOverH,
}

impl AxesArg {
    pub fn axes(self) -> FieldAxes {
        match self {
            AxesArg::Supergalactic => FieldAxes::Supergalactic,
            AxesArg::Galactic => FieldAxes::Galactic,
        }
    }
}

impl UnitArg {
    pub fn unit(self) -> LengthUnit {
        match self {
            UnitArg::Mpc => LengthUnit::Mpc,
            UnitArg::MpcOverH => LengthUnit::MpcOverH,
        }
    }
}

pub fn run(a: CorrectArgs) -> anyhow::Result<()> {
    let plan = plan_correct(CorrectOrder {
        input: a.input.clone(),
        output: a.output.clone(),
        flags: RunConfig {
            input: InputChoice { hdu: a.hdu.clone() },
            columns: a.columns.choice(),
            cosmology: a.cosmology.choice(),
            frame: a.frame.choice(),
            conventions: a.conventions.choice(),
            ..Default::default()
        },
        model: a.model.choice()?,
        force: a.force,
        override_input_settings: a.override_input_settings,
        command_line: std::env::args().collect::<Vec<_>>().join(" "),
    })
    .map_err(|e| anyhow!(e))?;
    let summary = run_correct(&plan).map_err(|e| anyhow!(e))?;
    println!("corrected {} rows", summary.rows);
    for (name, n) in &summary.counts {
        println!("  {name:<20} {n:>8}");
    }
    println!("wrote {}", summary.output.display());
    for c in &summary.cautions {
        println!("note: {c}");
    }
    Ok(())
}
