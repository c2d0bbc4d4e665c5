//! The generators: a mock catalogue with known truth (`mock`), and a velocity grid sampled
//! from an analytic model (`field`), each written with its record.

use crate::catalogue::field_io::{write_field_fits, write_field_table};
use crate::catalogue::{write_table, Format, WriteOptions};
use crate::physics::cosmology::LengthUnit;
use crate::physics::field::{hubble_per_length, AnalyticField, FieldAxes};
use crate::physics::power::growth_rate_of;
use crate::physics::sky::SkyRotations;
use crate::plan::{FieldPlan, MockPlan};

use super::cosmology_reaching;
use super::model::build_model;

/// What `mock` wrote.
#[derive(Debug, Clone)]
pub struct MockWritten {
    /// Objects written.
    pub objects: usize,
    /// How correlated velocities were drawn (the words of the record), when they were.
    pub correlated: Option<String>,
}

/// Make and write the mock, with the velocities drawn from the ΛCDM covariance when the
/// plan asks for them.
pub fn run_mock(plan: &MockPlan) -> Result<MockWritten, super::RunError> {
    let correlated = plan.correlated.as_ref();
    let params = plan.shared.cosmology.params;
    let cosmology = cosmology_reaching(params, plan.spec.z_max)?;
    let model = build_model(&plan.model, &params)?.map(|m| m.0);
    let rot = SkyRotations::default();
    let h = params.little_h();
    let radial = |n_gal: [f64; 3], r_mpc: f64| -> Option<f64> {
        let m = model.as_ref()?;
        let k = match m.length_unit().unwrap_or(LengthUnit::Mpc) {
            LengthUnit::Mpc => 1.0,
            LengthUnit::MpcOverH => h,
        };
        let n = m
            .axes()
            .unwrap_or(FieldAxes::Supergalactic)
            .from_galactic(&rot, n_gal);
        m.radial_velocity([n[0] * r_mpc * k, n[1] * r_mpc * k, n[2] * r_mpc * k])
    };
    let drawn = match correlated {
        None => None,
        Some(choice) => {
            let first = crate::mock::generate(
                &plan.spec,
                &cosmology,
                &plan.shared.frames.cmb,
                plan.shared.convention,
            )
            .map_err(|e| e.to_string())?;
            Some(super::correlated_mock::correlated_velocities(
                &plan.spec, &first, &cosmology, choice,
            )?)
        }
    };
    let with_drawn = |n_gal: [f64; 3], r_mpc: f64| -> Option<f64> {
        let a = radial(n_gal, r_mpc);
        let b = drawn.as_ref().and_then(|d| d.at(n_gal));
        match (a, b) {
            (None, None) => None,
            (a, b) => Some(a.unwrap_or(0.0) + b.unwrap_or(0.0)),
        }
    };
    let field: Option<&crate::mock::RadialField<'_>> = if model.is_some() || drawn.is_some() {
        Some(&with_drawn)
    } else {
        None
    };
    let mock = crate::mock::generate_with_field(
        &plan.spec,
        &cosmology,
        &plan.shared.frames.cmb,
        plan.shared.convention,
        field,
    )
    .map_err(|e| e.to_string())?;
    let table = mock.to_table();
    let inputs: Vec<(&str, std::path::PathBuf)> = plan
        .model
        .field
        .iter()
        .map(|p| ("velocity field", std::path::PathBuf::from(p)))
        .collect();
    let refs: Vec<(&str, &std::path::Path)> =
        inputs.iter().map(|(r, p)| (*r, p.as_path())).collect();
    let mut record = plan.shared.record("mock", &plan.command_line, &refs);
    record.details.insert(
        "mock_spec".into(),
        serde_json::to_string(&plan.spec).map_err(|e| e.to_string())?,
    );
    record.cautions = vec![
        "Invented data: a mock drawn from a known flow, with its truth in the true_* columns."
            .into(),
    ];
    if let (Some(choice), Some(d)) = (correlated, &drawn) {
        record.details.insert(
            "correlated".into(),
            serde_json::to_string(choice).map_err(|e| e.to_string())?,
        );
        record.cautions.push(d.description.clone());
    }
    write_table(
        &plan.output,
        &table,
        &record.to_provenance(),
        &WriteOptions {
            force: plan.force,
            protected: inputs.iter().map(|(_, p)| p.clone()).collect(),
        },
    )
    .map_err(|e| e.to_string())?;
    Ok(MockWritten {
        objects: mock.len(),
        correlated: drawn.map(|d| d.description),
    })
}

/// Sample the analytic model onto the grid and write it; returns the half-width of the grid.
pub fn run_field(plan: &FieldPlan) -> Result<f64, super::RunError> {
    let params = plan.shared.cosmology.params;
    let model = AnalyticField {
        bulk: plan.bulk,
        centres: plan
            .infall
            .iter()
            .map(crate::settings::InfallChoice::centre)
            .collect(),
        growth_rate: growth_rate_of(&params, 0.0),
        h0_km_s_per_length: hubble_per_length(&params, plan.unit),
        axes: plan.axes,
        length_unit: plan.unit,
    };
    let half = 0.5 * (plan.cells as f64 - 1.0) * plan.spacing;
    let grid = model
        .sample([-half; 3], plan.spacing, [plan.cells; 3])
        .map_err(|e| e.to_string())?;
    match Format::from_path(&plan.output).map_err(|e| e.to_string())? {
        Format::Fits => write_field_fits(&plan.output, &grid),
        _ => write_field_table(
            &plan.output,
            &grid,
            &WriteOptions {
                force: true,
                protected: vec![],
            },
        ),
    }
    .map_err(|e| e.to_string())?;
    Ok(half)
}
