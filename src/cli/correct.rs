//! `flowsift correct`: Hubble-diagram redshifts corrected with a velocity-field model.

use std::path::PathBuf;

use anyhow::anyhow;
use clap::{Args, ValueEnum};

use flowsift::catalogue::field_io::read_field;
use flowsift::physics::cosmology::LengthUnit;
use flowsift::physics::field::{
    hubble_per_length, AnalyticField, FieldAxes, FlowModel, InfallCentre,
};
use flowsift::physics::power::growth_rate;
use flowsift::run::correct::{run_correct, CorrectRequest};

use super::options::{ConventionFlags, CosmologyFlags, FrameFlags};
use super::velocities::{AngleArg, ZUnitArg};

/// Correct redshifts for the peculiar velocities a model predicts.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  flowsift correct sne.csv --field flow.fits -o sne_corrected.csv --beta 0.43 --sigma-v 250\n  flowsift correct sne.csv -o out.parquet --bulk 150,-200,80 --infall cluster,-30,20,5,0.8,8"
)]
pub struct CorrectArgs {
    /// Catalogue with ra, dec and z_helio (or cz_helio).
    pub input: PathBuf,
    /// Output (format by extension).
    #[arg(short, long)]
    pub output: PathBuf,
    #[command(flatten)]
    pub model: ModelFlags,
    /// Right-ascension column (default ra).
    #[arg(long = "ra-column", value_name = "NAME")]
    pub ra: Option<String>,
    /// Declination column (default dec).
    #[arg(long = "dec-column", value_name = "NAME")]
    pub dec: Option<String>,
    /// Unit of ra/dec: deg, rad or sexagesimal.
    #[arg(long = "angle-unit", value_enum, value_name = "UNIT")]
    pub angle_unit: Option<AngleArg>,
    /// Heliocentric redshift column (default z_helio, or cz_helio).
    #[arg(long = "z-column", value_name = "NAME")]
    pub z: Option<String>,
    /// Unit of the redshift column: z or cz (km/s).
    #[arg(long = "z-unit", value_enum, value_name = "UNIT")]
    pub z_unit: Option<ZUnitArg>,
    /// Redshift-error column (default z_err, or cz_err).
    #[arg(long = "z-err-column", value_name = "NAME")]
    pub z_err: Option<String>,
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
    /// Growth rate f for --density (default Ω_m^0.55 of the cosmology).
    #[arg(long = "growth-rate", value_name = "F", requires = "density")]
    pub growth_rate: Option<f64>,
    /// Axes of the model's Cartesian coordinates (when the file does not say): supergalactic or galactic.
    #[arg(long = "field-axes", value_enum, value_name = "AXES")]
    pub field_axes: Option<AxesArg>,
    /// Length unit of the model's coordinates (when the file does not say): mpc or mpc-over-h.
    #[arg(long = "field-unit", value_enum, value_name = "UNIT")]
    pub field_unit: Option<UnitArg>,
    /// Analytic uniform bulk flow, km/s, on the model axes.
    #[arg(
        long,
        value_name = "VX,VY,VZ",
        value_parser = super::options::parse_vector3,
        allow_hyphen_values = true
    )]
    pub bulk: Option<[f64; 3]>,
    /// Analytic linear infall onto a centre: NAME,X,Y,Z,DELTA0,R_SCALE (positions in the model
    /// length unit); repeat for several centres.
    #[arg(long, value_name = "NAME,X,Y,Z,DELTA0,R", allow_hyphen_values = true)]
    pub infall: Vec<String>,
    /// Scale of the model velocities (β, or the fσ8 ratio), default 1.
    #[arg(long, value_name = "B", allow_negative_numbers = true)]
    pub beta: Option<f64>,
    /// External dipole V_ext added to the model, km/s, model axes.
    #[arg(
        long,
        value_name = "VX,VY,VZ",
        value_parser = super::options::parse_vector3,
        allow_hyphen_values = true
    )]
    pub external: Option<[f64; 3]>,
    /// Residual velocity dispersion about the model, km/s (default 250, common practice).
    #[arg(long = "sigma-v", value_name = "KM_S", allow_negative_numbers = true)]
    pub sigma_v: Option<f64>,
}

impl ModelFlags {
    /// Build the model, or None when no model flag is given.
    pub fn build(
        &self,
        params: &flowsift::physics::cosmology::CosmologyParams,
    ) -> anyhow::Result<Option<(FlowModel, String)>> {
        let axes_hint = self.field_axes.map(|x| match x {
            AxesArg::Supergalactic => FieldAxes::Supergalactic,
            AxesArg::Galactic => FieldAxes::Galactic,
        });
        let unit_hint = self.field_unit.map(|u| match u {
            UnitArg::Mpc => LengthUnit::Mpc,
            UnitArg::MpcOverH => LengthUnit::MpcOverH,
        });
        let mut description = vec![];
        let grid = match (&self.field, &self.density) {
            (Some(p), _) => {
                description.push(format!("grid {}", p.display()));
                Some(read_field(p, axes_hint, unit_hint)?)
            }
            (None, Some(p)) => {
                use flowsift::physics::field::{
                    velocity_from_density, velocity_from_density_isolated, DensityBoundary,
                };
                let d = flowsift::catalogue::field_io::read_density(p, axes_hint, unit_hint)?;
                let f = self
                    .growth_rate
                    .unwrap_or_else(|| growth_rate(params.omega_m, params.omega_de, 0.0));
                let boundary = match self.density_boundary {
                    Some(BoundaryArg::Periodic) => DensityBoundary::Periodic,
                    Some(BoundaryArg::Isolated) | None => DensityBoundary::Isolated,
                };
                let solve = match boundary {
                    DensityBoundary::Isolated => velocity_from_density_isolated,
                    DensityBoundary::Periodic => velocity_from_density,
                };
                let v = solve(
                    &d.v[0],
                    d.shape,
                    d.spacing,
                    f,
                    hubble_per_length(params, d.length_unit),
                );
                let outside = match boundary {
                    DensityBoundary::Isolated => "δ = 0 outside the grid",
                    DensityBoundary::Periodic => "the grid taken as a periodic box",
                };
                description.push(format!(
                    "linear-theory velocities from the density grid {} (f = {f:.4}, {outside})",
                    p.display()
                ));
                Some(flowsift::physics::field::VelocityGrid { v, ..d })
            }
            (None, None) => None,
        };
        let centres: Vec<InfallCentre> = self
            .infall
            .iter()
            .map(|s| parse_infall(s))
            .collect::<anyhow::Result<_>>()?;
        let analytic = if self.bulk.is_some() || !centres.is_empty() {
            let axes = grid
                .as_ref()
                .map(|g| g.axes)
                .or(axes_hint)
                .unwrap_or(FieldAxes::Supergalactic);
            let unit = grid
                .as_ref()
                .map(|g| g.length_unit)
                .or(unit_hint)
                .unwrap_or(LengthUnit::Mpc);
            let bulk = self
                .bulk
                .as_ref()
                .map(|b| [b[0], b[1], b[2]])
                .unwrap_or([0.0; 3]);
            let f = growth_rate(params.omega_m, params.omega_de, 0.0);
            if self.bulk.is_some() {
                description.push(format!(
                    "uniform flow ({}, {}, {}) km/s",
                    bulk[0], bulk[1], bulk[2]
                ));
            }
            for c in &centres {
                description.push(format!(
                    "linear infall onto '{}' (Δ0 = {}, r_s = {})",
                    c.name, c.delta0, c.r_scale
                ));
            }
            Some(AnalyticField {
                bulk,
                centres,
                growth_rate: f,
                h0_km_s_per_length: hubble_per_length(params, unit),
                axes,
                length_unit: unit,
            })
        } else {
            None
        };
        if grid.is_none() && analytic.is_none() && self.external.is_none() {
            return Ok(None);
        }
        let model = FlowModel {
            grid,
            analytic,
            beta: self.beta.unwrap_or(1.0),
            external: self
                .external
                .as_ref()
                .map(|e| [e[0], e[1], e[2]])
                .unwrap_or([0.0; 3]),
            sigma_v: self.sigma_v.unwrap_or(250.0),
        };
        model.check().map_err(|e| anyhow!("velocity model: {e}"))?;
        let axes = model.axes().unwrap_or(FieldAxes::Supergalactic);
        description.push(format!(
            "β = {}, V_ext = {:?} km/s, σ_v = {} km/s, {} axes",
            model.beta,
            model.external,
            model.sigma_v,
            axes.name()
        ));
        Ok(Some((model, description.join("; "))))
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

pub fn parse_infall(s: &str) -> anyhow::Result<InfallCentre> {
    let p: Vec<&str> = s.split(',').map(str::trim).collect();
    if p.len() != 6 {
        return Err(anyhow!(
            "--infall '{s}': expected NAME,X,Y,Z,DELTA0,R_SCALE"
        ));
    }
    let num = |i: usize| -> anyhow::Result<f64> {
        p[i].parse::<f64>()
            .map_err(|_| anyhow!("--infall '{s}': '{}' is not a number", p[i]))
    };
    Ok(InfallCentre {
        name: p[0].to_string(),
        position: [num(1)?, num(2)?, num(3)?],
        delta0: num(4)?,
        r_scale: num(5)?,
    })
}

pub fn run(a: CorrectArgs) -> anyhow::Result<()> {
    let cosmology = a.cosmology.choice();
    let params = cosmology.resolve().map_err(|e| anyhow!(e))?.params;
    let (model, description) = a
        .model
        .build(&params)?
        .ok_or_else(|| anyhow!("give a velocity model: --field FILE, --bulk VX,VY,VZ, --infall … or --external VX,VY,VZ"))?;
    let summary = run_correct(&CorrectRequest {
        input: a.input.clone(),
        output: a.output.clone(),
        force: a.force,
        command_line: std::env::args().collect::<Vec<_>>().join(" "),
        ra: a.ra.clone(),
        dec: a.dec.clone(),
        z: a.z.clone(),
        z_unit: a.z_unit.map(|u| match u {
            ZUnitArg::Z => flowsift::settings::RedshiftUnit::Z,
            ZUnitArg::Cz => flowsift::settings::RedshiftUnit::Cz,
        }),
        z_err: a.z_err.clone(),
        angle_unit: a.angle_unit.map(|x| match x {
            AngleArg::Deg => flowsift::settings::AngleUnit::Deg,
            AngleArg::Rad => flowsift::settings::AngleUnit::Rad,
            AngleArg::Sexagesimal => flowsift::settings::AngleUnit::Sexagesimal,
        }),
        cosmology,
        frame: a.frame.choice(),
        convention: a.conventions.choice().dl_convention.unwrap_or_default(),
        model: &model,
        model_description: description.clone(),
    })
    .map_err(|e| anyhow!(e))?;
    println!("corrected {} rows with {description}", summary.rows);
    for (name, n) in &summary.counts {
        println!("  {name:<20} {n:>8}");
    }
    println!("wrote {}", summary.output.display());
    for c in &summary.cautions {
        println!("note: {c}");
    }
    Ok(())
}
