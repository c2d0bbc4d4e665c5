//! A velocity model built from the user's choice: the grid read (or the density grid read
//! and solved for linear-theory velocities), the analytic parts, and a description of it for
//! the record and the summary.

use crate::catalogue::field_io::{read_density, read_field};
use crate::physics::cosmology::{CosmologyParams, LengthUnit};
use crate::physics::field::{
    hubble_per_length, velocity_from_density, velocity_from_density_isolated, AnalyticField,
    DensityBoundary, FieldAxes, FlowModel, InfallCentre, VelocityGrid,
};
use crate::physics::power::growth_rate;
use crate::settings::{InfallChoice, ModelChoice, DEFAULT_SIGMA_V_KM_S};

/// The model and what it is, or None when the choice names no model part.
pub fn build_model(
    choice: &ModelChoice,
    params: &CosmologyParams,
) -> Result<Option<(FlowModel, String)>, String> {
    let axes_hint = choice.field_axes;
    let unit_hint = choice.field_unit;
    let mut description = vec![];
    let grid: Option<VelocityGrid> = match (&choice.field, &choice.density) {
        (Some(p), _) => {
            description.push(format!("grid {p}"));
            Some(
                read_field(std::path::Path::new(p), axes_hint, unit_hint)
                    .map_err(|e| e.to_string())?,
            )
        }
        (None, Some(p)) => {
            let d = read_density(std::path::Path::new(p), axes_hint, unit_hint)
                .map_err(|e| e.to_string())?;
            let f = choice
                .growth_rate
                .unwrap_or_else(|| growth_rate(params.omega_m, params.omega_de, 0.0));
            let boundary = choice.density_boundary.unwrap_or(DensityBoundary::Isolated);
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
                "linear-theory velocities from the density grid {p} (f = {f:.4}, {outside})"
            ));
            Some(VelocityGrid { v, ..d })
        }
        (None, None) => None,
    };
    let centres: Vec<InfallCentre> = choice.infall.iter().map(InfallChoice::centre).collect();
    let analytic = if choice.bulk.is_some() || !centres.is_empty() {
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
        let bulk = choice.bulk.unwrap_or([0.0; 3]);
        if choice.bulk.is_some() {
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
            growth_rate: growth_rate(params.omega_m, params.omega_de, 0.0),
            h0_km_s_per_length: hubble_per_length(params, unit),
            axes,
            length_unit: unit,
        })
    } else {
        None
    };
    if grid.is_none() && analytic.is_none() && choice.external.is_none() {
        return Ok(None);
    }
    let model = FlowModel {
        grid,
        analytic,
        beta: choice.beta.unwrap_or(1.0),
        external: choice.external.unwrap_or([0.0; 3]),
        sigma_v: choice.sigma_v.unwrap_or(DEFAULT_SIGMA_V_KM_S),
    };
    model.check().map_err(|e| format!("velocity model: {e}"))?;
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
