//! The plans of the generators: `mock` (a catalogue with known truth) and `field` (a velocity
//! grid sampled from an analytic model). Scenarios and defaults are resolved here; the
//! output and any field file read are checked.

use std::path::PathBuf;

use crate::mock::correlated::{CorrelatedChoice, CorrelatedMethod, CHOLESKY_MAX_OBJECTS};
use crate::mock::{DistanceError, MockSpec, Population};
use crate::physics::field::FieldAxes;
use crate::settings::{InfallChoice, LengthUnit, ModelChoice, RunConfig};

use super::common::Shared;
use super::paths::Files;
use super::velocities::{format_of_output, table_output};

/// The largest mock flowsift makes.
pub const MAX_MOCK_OBJECTS: usize = 100_000_000;
/// The most cells per axis of a sampled field.
pub const MAX_FIELD_CELLS: usize = 1024;

/// Changes to the mock's spec, field by field.
#[derive(Debug, Clone, Default)]
pub struct MockOverrides {
    pub n: Option<usize>,
    pub seed: Option<u64>,
    /// Uniform flow, km/s, on `axes`.
    pub uniform_flow: Option<[f64; 3]>,
    /// Axes of `uniform_flow` (default supergalactic, as for `field` and `correct`).
    pub axes: Option<FieldAxes>,
    pub sigma_v: Option<f64>,
    pub z_min: Option<f64>,
    pub z_max: Option<f64>,
    pub mu_err: Option<f64>,
    pub distance_error: Option<f64>,
    pub z_err: Option<f64>,
    pub outlier_fraction: Option<f64>,
    pub sky_cut: Option<f64>,
}

/// What the user asked of `mock`.
#[derive(Debug, Clone)]
pub struct MockOrder {
    pub output: PathBuf,
    pub scenario: Option<String>,
    pub overrides: MockOverrides,
    /// A velocity grid (with its axes, unit and β) whose radial velocities are added.
    pub model: ModelChoice,
    /// Cosmology, frames, conventions.
    pub flags: RunConfig,
    /// Velocities drawn from the ΛCDM covariance of the objects (`--correlated`).
    pub correlated: Option<CorrelatedChoice>,
    pub force: bool,
    pub command_line: String,
}

/// A checked `mock`.
#[derive(Debug, Clone)]
pub struct MockPlan {
    pub output: PathBuf,
    pub spec: MockSpec,
    pub model: ModelChoice,
    /// The correlated draw, its method resolved for the mock's size.
    pub correlated: Option<CorrelatedChoice>,
    pub shared: Shared,
    pub force: bool,
    pub command_line: String,
}

/// Resolve the spec and check the files.
pub fn plan_mock(order: MockOrder) -> Result<MockPlan, super::PlanError> {
    let mut spec = match &order.scenario {
        Some(name) => MockSpec::scenario(name)?,
        None => MockSpec::generic(),
    };
    let o = &order.overrides;
    if let Some(n) = o.n {
        if n > MAX_MOCK_OBJECTS {
            return Err(format!(
                "--n {n} is more than the {MAX_MOCK_OBJECTS} objects flowsift makes in one mock"
            )
            .into());
        }
        spec.n = n;
    }
    spec.seed = o.seed.unwrap_or(spec.seed);
    if let Some(v) = o.uniform_flow {
        // The spec holds its flow in Galactic axes; the flag is on the run's axes.
        let axes = o.axes.unwrap_or(FieldAxes::Supergalactic);
        spec.bulk_flow = axes.to_galactic(&crate::physics::sky::SkyRotations::default(), v);
    }
    spec.sigma_v = o.sigma_v.unwrap_or(spec.sigma_v);
    spec.z_min = o.z_min.unwrap_or(spec.z_min);
    spec.z_max = o.z_max.unwrap_or(spec.z_max);
    spec.z_err = o.z_err.unwrap_or(spec.z_err);
    spec.outlier_fraction = o.outlier_fraction.unwrap_or(spec.outlier_fraction);
    if let Some(c) = o.sky_cut {
        spec.zone_of_avoidance_deg = Some(c);
    }
    let single = |err: DistanceError| {
        vec![Population {
            name: "generic".into(),
            fraction: 1.0,
            distance_error: err,
        }]
    };
    if let Some(m) = o.mu_err {
        spec.populations = single(DistanceError::Magnitudes(m));
    }
    if let Some(f) = o.distance_error {
        spec.populations = single(DistanceError::Fractional(f));
    }
    let correlated = order
        .correlated
        .map(|c| resolve_correlated(c, spec.n))
        .transpose()?;
    format_of_output(&order.output)?;
    let mut files = Files::new();
    if let Some(p) = &order.model.field {
        files.read("velocity field", std::path::Path::new(p));
    }
    table_output(&mut files, "output", &order.output);
    files.check(order.force)?;
    let shared = Shared::resolve(None, None, &order.flags, false)?;
    Ok(MockPlan {
        output: order.output,
        spec,
        model: order.model,
        correlated,
        shared,
        force: order.force,
        command_line: order.command_line,
    })
}

/// Check fσ8, k_max (the range the `covariance` command takes) and the method of a correlated draw of `n` objects and resolve the method
/// (Cholesky up to [`CHOLESKY_MAX_OBJECTS`], the random field above).
fn resolve_correlated(
    choice: CorrelatedChoice,
    n: usize,
) -> Result<CorrelatedChoice, super::PlanError> {
    if let Some(f) = choice.fsigma8 {
        if !(f.is_finite() && f >= 0.0) {
            return Err(format!("--fsigma8 must be a non-negative number, got {f}").into());
        }
    }
    if let Some(k) = choice.k_max {
        if !(k.is_finite() && (0.005..=1000.0).contains(&k)) {
            return Err(format!(
                "--correlated-kmax must lie between 0.005 and 1000 h/Mpc, got {k}"
            )
            .into());
        }
    }
    let method = choice
        .method
        .unwrap_or_else(|| CorrelatedMethod::for_count(n));
    if method == CorrelatedMethod::Cholesky && n > CHOLESKY_MAX_OBJECTS {
        return Err(format!(
            "--correlated-method cholesky takes at most {CHOLESKY_MAX_OBJECTS} objects (the covariance is N × N), the mock has {n}; use --correlated-method field or leave the method to the default"
        )
        .into());
    }
    Ok(CorrelatedChoice {
        method: Some(method),
        ..choice
    })
}

/// What the user asked of `field`.
#[derive(Debug, Clone)]
pub struct FieldOrder {
    pub output: PathBuf,
    pub scenario: Option<String>,
    pub bulk: Option<[f64; 3]>,
    pub infall: Vec<InfallChoice>,
    pub cells: Option<usize>,
    pub spacing: Option<f64>,
    pub axes: Option<FieldAxes>,
    pub unit: Option<LengthUnit>,
    /// Cosmology.
    pub flags: RunConfig,
    pub force: bool,
}

/// A checked `field`.
#[derive(Debug, Clone)]
pub struct FieldPlan {
    pub output: PathBuf,
    pub bulk: [f64; 3],
    pub infall: Vec<InfallChoice>,
    pub cells: usize,
    pub spacing: f64,
    pub axes: FieldAxes,
    pub unit: LengthUnit,
    pub shared: Shared,
}

/// Resolve the scenario and defaults (48 cells of 18 length units; `lantern`: 26 of 36,
/// reaching past z = 0.1), and check the output.
pub fn plan_field(order: FieldOrder) -> Result<FieldPlan, super::PlanError> {
    let axes = order.axes.unwrap_or(FieldAxes::Supergalactic);
    let unit = order.unit.unwrap_or(LengthUnit::Mpc);
    let mut bulk = order.bulk.unwrap_or([0.0; 3]);
    let (mut cells, mut spacing) = (48, 18.0);
    match order.scenario.as_deref() {
        Some("lantern") => {
            // The demo survey's flow, given in Galactic axes by the mock spec; a uniform flow
            // interpolates exactly, so a coarse grid reaching past z = 0.1 will do.
            let g = MockSpec::demo_survey().bulk_flow;
            bulk = axes.from_galactic(&crate::physics::sky::SkyRotations::default(), g);
            (cells, spacing) = (26, 36.0);
        }
        Some(other) => return Err(format!("unknown scenario '{other}'; known: lantern").into()),
        None => {}
    }
    let cells = order.cells.unwrap_or(cells);
    let spacing = order.spacing.unwrap_or(spacing);
    if !((2..=MAX_FIELD_CELLS).contains(&cells) && spacing.is_finite() && spacing > 0.0) {
        return Err(
            format!("--cells must be from 2 to {MAX_FIELD_CELLS} and --spacing positive").into(),
        );
    }
    let mut files = Files::new();
    match crate::catalogue::Format::from_path(&order.output) {
        Ok(crate::catalogue::Format::Fits) => {
            files.write("field file", &order.output);
        }
        _ => {
            format_of_output(&order.output)?;
            table_output(&mut files, "field table", &order.output);
        }
    }
    files.check(order.force)?;
    Ok(FieldPlan {
        output: order.output,
        bulk,
        infall: order.infall,
        cells,
        spacing,
        axes,
        unit,
        shared: Shared::resolve(None, None, &order.flags, false)?,
    })
}
