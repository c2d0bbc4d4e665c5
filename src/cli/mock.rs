//! `flowsift mock`: mock catalogues with known truth, in any supported format.

use std::path::PathBuf;

use anyhow::anyhow;
use clap::Args;

use flowsift::catalogue::{write_table, Provenance, WriteOptions};
use flowsift::mock::{DistanceError, MockSpec, Population};
use flowsift::physics::restframe::Boost;

use super::options::{ConventionFlags, CosmologyFlags, FrameFlags};

/// Make a mock catalogue.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  flowsift mock -o mock.csv --n 5000 --seed 3 --bulk-flow 200,-100,50 --sigma-v 300 --z-max 0.08 --distance-error 0.2\n  flowsift mock -o demo-data/lantern_survey.fits --scenario lantern"
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
    /// Bulk flow, km/s, Galactic Cartesian (x → l = 0, y → l = 90°, z → NGP).
    #[arg(
        long = "bulk-flow",
        value_name = "VX,VY,VZ",
        value_parser = super::options::parse_vector3,
        allow_hyphen_values = true
    )]
    pub bulk_flow: Option<[f64; 3]>,
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
    /// Axes of the field (when the file does not say).
    #[arg(long = "field-axes", value_enum, value_name = "AXES")]
    pub field_axes: Option<super::correct::AxesArg>,
    /// Length unit of the field (when the file does not say).
    #[arg(long = "field-unit", value_enum, value_name = "UNIT")]
    pub field_unit: Option<super::correct::UnitArg>,
    /// Scale of the field velocities (β), default 1.
    #[arg(long = "field-beta", value_name = "B", allow_negative_numbers = true)]
    pub field_beta: Option<f64>,
    /// Leave out |b| below this many degrees (zone of avoidance).
    #[arg(long = "sky-cut", value_name = "DEG", allow_negative_numbers = true)]
    pub sky_cut: Option<f64>,
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

fn base_spec(scenario: &Option<String>) -> anyhow::Result<MockSpec> {
    Ok(match scenario.as_deref() {
        Some("lantern") => MockSpec::demo_survey(),
        Some(other) => return Err(anyhow!("unknown scenario '{other}'; known: lantern")),
        None => MockSpec {
            name: "mock".into(),
            n: 1000,
            seed: 1,
            bulk_flow: [0.0; 3],
            sigma_v: 250.0,
            z_min: 0.003,
            z_max: 0.1,
            zone_of_avoidance_deg: None,
            z_err: 0.0,
            populations: vec![Population {
                name: "generic".into(),
                fraction: 1.0,
                distance_error: DistanceError::Fractional(0.2),
            }],
            outlier_fraction: 0.0,
            outlier_offset_mag: [2.5, 4.0],
        },
    })
}

pub fn run(a: MockArgs) -> anyhow::Result<()> {
    let mut spec = base_spec(&a.scenario)?;
    if let Some(n) = a.n {
        spec.n = n;
    }
    if let Some(s) = a.seed {
        spec.seed = s;
    }
    if let Some(b) = &a.bulk_flow {
        spec.bulk_flow = [b[0], b[1], b[2]];
    }
    if let Some(v) = a.sigma_v {
        spec.sigma_v = v;
    }
    if let Some(z) = a.z_min {
        spec.z_min = z;
    }
    if let Some(z) = a.z_max {
        spec.z_max = z;
    }
    if let Some(e) = a.z_err {
        spec.z_err = e;
    }
    if let Some(f) = a.outlier_fraction {
        spec.outlier_fraction = f;
    }
    if let Some(c) = a.sky_cut {
        spec.zone_of_avoidance_deg = Some(c);
    }
    let single = |err: DistanceError| {
        vec![Population {
            name: "generic".into(),
            fraction: 1.0,
            distance_error: err,
        }]
    };
    if let Some(m) = a.mu_err {
        spec.populations = single(DistanceError::Magnitudes(m));
    }
    if let Some(f) = a.distance_error {
        spec.populations = single(DistanceError::Fractional(f));
    }
    let resolved = a.cosmology.choice().resolve().map_err(|e| anyhow!(e))?;
    let cosmology = resolved
        .build(spec.z_max.max(0.1))
        .map_err(|e| anyhow!(e))?;
    let frames = a.frame.choice().resolve().map_err(|e| anyhow!(e))?;
    let convention = a.conventions.choice().dl_convention.unwrap_or_default();
    let boost: Boost<_> = frames.cmb;
    let model = match &a.field {
        Some(p) => {
            let flags = super::correct::ModelFlags {
                field: Some(p.clone()),
                field_axes: a.field_axes,
                field_unit: a.field_unit,
                beta: a.field_beta,
                ..Default::default()
            };
            flags.build(&resolved.params)?.map(|m| m.0)
        }
        None => None,
    };
    let rot = flowsift::physics::sky::SkyRotations::default();
    let h = resolved.params.little_h();
    let radial = |n_gal: [f64; 3], r_mpc: f64| -> Option<f64> {
        let m = model.as_ref()?;
        let k = match m
            .length_unit()
            .unwrap_or(flowsift::physics::cosmology::LengthUnit::Mpc)
        {
            flowsift::physics::cosmology::LengthUnit::Mpc => 1.0,
            flowsift::physics::cosmology::LengthUnit::MpcOverH => h,
        };
        let n = m
            .axes()
            .unwrap_or(flowsift::physics::field::FieldAxes::Supergalactic)
            .from_galactic(&rot, n_gal);
        m.radial_velocity([n[0] * r_mpc * k, n[1] * r_mpc * k, n[2] * r_mpc * k])
    };
    let field: Option<&flowsift::mock::RadialField<'_>> =
        if model.is_some() { Some(&radial) } else { None };
    let mock = flowsift::mock::generate_with_field(&spec, &cosmology, &boost, convention, field)
        .map_err(|e| anyhow!("{e}"))?;
    let table = mock.to_table();
    let mut provenance = Provenance::default();
    provenance.entries.push((
        "software".into(),
        format!("flowsift {}", env!("CARGO_PKG_VERSION")),
    ));
    provenance.entries.push((
        "command".into(),
        std::env::args().collect::<Vec<_>>().join(" "),
    ));
    provenance
        .entries
        .push(("mock_spec".into(), serde_json::to_string(&spec)?));
    if let Some(p) = &a.field {
        provenance
            .entries
            .push(("field".into(), p.display().to_string()));
    }
    provenance
        .entries
        .push(("cosmology".into(), serde_json::to_string(&resolved)?));
    provenance
        .entries
        .push(("cmb_apex".into(), serde_json::to_string(&frames.cmb_apex)?));
    provenance
        .entries
        .push(("dl_convention".into(), convention.name().into()));
    write_table(
        &a.output,
        &table,
        &provenance,
        &WriteOptions {
            force: a.force,
            protected: vec![],
        },
    )?;
    println!(
        "wrote {} objects of '{}' to {}",
        mock.len(),
        spec.name,
        a.output.display()
    );
    Ok(())
}
