//! `flowsift mock`: mock catalogues with known truth, in any supported format.

use std::path::PathBuf;

use anyhow::anyhow;
use clap::Args;

use flowsift::mock::correlated::{CorrelatedChoice, CorrelatedMethod};
use flowsift::plan::{plan_mock, MockOrder, MockOverrides};
use flowsift::settings::{ModelChoice, RunConfig};

use flowsift::flags::options::{ConventionFlags, CosmologyFlags, FrameFlags};

/// Make a mock catalogue.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  flowsift mock -o mock.csv --n 5000 --seed 3 --uniform-flow 200,-100,50 --sigma-v 300 --z-max 0.08 --distance-error 0.2\n  flowsift mock -o demo-data/lantern_survey.fits --scenario lantern"
)]
pub struct MockArgs {
    /// Output catalogue (format by extension).
    #[arg(short, long)]
    pub output: PathBuf,
    /// Start from a named scenario: lantern (the invented demo survey). Flags override it.
    #[arg(long, value_name = "NAME")]
    pub scenario: Option<String>,
    /// Number of objects.
    #[arg(long, value_name = "N", allow_negative_numbers = true)]
    pub n: Option<usize>,
    /// Seed of the random streams.
    #[arg(long, value_name = "S", allow_negative_numbers = true)]
    pub seed: Option<u64>,
    /// Uniform flow added to every object, km/s, as VX,VY,VZ on the --axes (default
    /// supergalactic).
    #[arg(
        long = "uniform-flow",
        value_name = "VX,VY,VZ",
        value_parser = flowsift::flags::options::parse_vector3,
        allow_hyphen_values = true
    )]
    pub uniform_flow: Option<[f64; 3]>,
    /// Random radial velocity dispersion, km/s.
    #[arg(long = "sigma-v", value_name = "KM_S", allow_negative_numbers = true)]
    pub sigma_v: Option<f64>,
    /// Lowest cosmological redshift.
    #[arg(long = "z-min", value_name = "Z", allow_negative_numbers = true)]
    pub z_min: Option<f64>,
    /// Highest cosmological redshift.
    #[arg(long = "z-max", value_name = "Z", allow_negative_numbers = true)]
    pub z_max: Option<f64>,
    /// Gaussian error of μ, mag (one population).
    #[arg(
        long = "mu-err",
        value_name = "MAG",
        conflicts_with = "distance_error",
        allow_negative_numbers = true
    )]
    pub mu_err: Option<f64>,
    /// Fractional (log-normal) distance error, e.g. 0.2 (one population).
    #[arg(
        long = "distance-error",
        value_name = "F",
        allow_negative_numbers = true
    )]
    pub distance_error: Option<f64>,
    /// Gaussian error of z_helio.
    #[arg(long = "z-err", value_name = "Z", allow_negative_numbers = true)]
    pub z_err: Option<f64>,
    /// Fraction of objects given a gross distance error of 2.5–4 mag (injected outliers).
    #[arg(
        long = "outlier-fraction",
        value_name = "F",
        allow_negative_numbers = true
    )]
    pub outlier_fraction: Option<f64>,
    /// Add the radial velocity of this velocity grid (our FITS field file or an x,y,z,vx,vy,vz
    /// table) at each object's true position.
    #[arg(long, value_name = "FIELD")]
    pub field: Option<PathBuf>,
    /// Cartesian axes of --uniform-flow and of a --field file that does not say its own:
    /// supergalactic (default) or galactic.
    #[arg(long = "axes", value_enum, value_name = "AXES")]
    pub axes: Option<super::correct::AxesArg>,
    /// Length unit of the field (when the file does not say).
    #[arg(long = "field-unit", value_enum, value_name = "UNIT")]
    pub field_unit: Option<super::correct::UnitArg>,
    /// Scale of the field velocities (β), default 1.
    #[arg(long = "field-beta", value_name = "B", allow_negative_numbers = true)]
    pub field_beta: Option<f64>,
    /// Leave out |b| below this many degrees (zone of avoidance).
    #[arg(long = "sky-cut", value_name = "DEG", allow_negative_numbers = true)]
    pub sky_cut: Option<f64>,
    /// Draw the peculiar velocities from the linear ΛCDM covariance of the objects themselves
    /// (Cholesky factorisation up to 5000 objects, a Gaussian random field on a grid above),
    /// at the amplitude --fsigma8.
    #[arg(long)]
    pub correlated: bool,
    /// How --correlated draws: cholesky (exact, at most 5000 objects) or field (a Gaussian
    /// random field on a periodic grid; misses the modes longer than the box). Default:
    /// cholesky up to 5000 objects, field above.
    #[arg(
        long = "correlated-method",
        value_enum,
        value_name = "METHOD",
        requires = "correlated"
    )]
    pub correlated_method: Option<CorrelatedMethodArg>,
    /// fσ8 of the correlated velocities (default: Planck 2018 σ8 × Ω_m^0.55 of the cosmology).
    #[arg(long, value_name = "FS8", requires = "correlated")]
    pub fsigma8: Option<f64>,
    /// Upper wavenumber of the correlated velocities' covariance, h/Mpc (default 0.2).
    #[arg(long = "correlated-kmax", value_name = "K", requires = "correlated")]
    pub correlated_kmax: Option<f64>,
    #[command(flatten)]
    pub cosmology: CosmologyFlags,
    #[command(flatten)]
    pub frame: FrameFlags,
    #[command(flatten)]
    pub conventions: ConventionFlags,
    /// Replace an existing output.
    #[arg(long)]
    pub force: bool,
}

/// The values of --correlated-method.
#[derive(Debug, Clone, Copy, clap::ValueEnum)]
pub enum CorrelatedMethodArg {
    Cholesky,
    Field,
}

impl CorrelatedMethodArg {
    fn method(self) -> CorrelatedMethod {
        match self {
            CorrelatedMethodArg::Cholesky => CorrelatedMethod::Cholesky,
            CorrelatedMethodArg::Field => CorrelatedMethod::Field,
        }
    }
}

pub fn run(a: MockArgs) -> anyhow::Result<()> {
    let plan = plan_mock(MockOrder {
        output: a.output.clone(),
        scenario: a.scenario.clone(),
        overrides: MockOverrides {
            n: a.n,
            seed: a.seed,
            uniform_flow: a.uniform_flow,
            axes: a.axes.map(super::correct::AxesArg::axes),
            sigma_v: a.sigma_v,
            z_min: a.z_min,
            z_max: a.z_max,
            mu_err: a.mu_err,
            distance_error: a.distance_error,
            z_err: a.z_err,
            outlier_fraction: a.outlier_fraction,
            sky_cut: a.sky_cut,
        },
        model: ModelChoice {
            field: a.field.as_ref().map(|p| p.display().to_string()),
            field_axes: a.axes.map(super::correct::AxesArg::axes),
            field_unit: a.field_unit.map(super::correct::UnitArg::unit),
            beta: a.field_beta,
            ..Default::default()
        },
        flags: RunConfig {
            cosmology: a.cosmology.choice(),
            frame: a.frame.choice(),
            conventions: a.conventions.choice(),
            ..Default::default()
        },
        correlated: a.correlated.then_some(CorrelatedChoice {
            fsigma8: a.fsigma8,
            k_max: a.correlated_kmax,
            method: a.correlated_method.map(CorrelatedMethodArg::method),
        }),
        force: a.force,
        command_line: std::env::args().collect::<Vec<_>>().join(" "),
    })
    .map_err(|e| anyhow!(e))?;
    let written = flowsift::run::generate::run_mock(&plan).map_err(|e| anyhow!(e))?;
    println!(
        "wrote {} objects of '{}' to {}",
        written.objects,
        plan.spec.name,
        a.output.display()
    );
    if let Some(words) = &written.correlated {
        println!(
            "note: {words} (fiducial cosmology, linear theory; the mock's record says the same)"
        );
    }
    Ok(())
}
