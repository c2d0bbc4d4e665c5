//! A velocity model built from the user's choice: the grid read (or the density grid read
//! and solved for linear-theory velocities), the analytic parts, and a description of it for
//! the record and the summary.

use crate::catalogue::field_io::{read_density, read_field};
use crate::physics::cosmology::{CosmologyParams, LengthUnit};
use crate::physics::field::{
    hubble_per_length, velocity_from_density, velocity_from_density_isolated, AnalyticField,
    DensityBoundary, FieldAxes, FlowModel, InfallCentre, VelocityGrid,
};
use crate::physics::power::growth_rate_of;
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
            // A galaxy density contrast δ_g = b δ gives v ∝ β = f/b, with no growth rate inside;
            // a matter density gives v ∝ f (linear theory; Strauss & Willick 1995, Phys. Rep.
            // 261, 271, §3, from memory). The two readings are distinct inputs.
            let (f, reading) = match (choice.beta, choice.growth_rate) {
                (Some(_), Some(_)) => {
                    return Err("--beta (a galaxy density contrast, β = f/b) and --growth-rate (a matter density contrast) are two readings of a density grid: give one".into())
                }
                (Some(b), None) => (b, format!("read as a galaxy density contrast, β = {b}")),
                (None, Some(f)) => (f, format!("read as a matter density contrast, f = {f}")),
                (None, None) => {
                    let f = growth_rate_of(params, 0.0);
                    (
                        f,
                        format!("read as a matter density contrast, f = Ω_m^γ = {f:.4} (Linder 2005)"),
                    )
                }
            };
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
                "linear-theory velocities from the density grid {p} ({reading}; {outside})"
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
            growth_rate: growth_rate_of(params, 0.0),
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
        // With a density grid β is already inside the grid's velocities.
        beta: if choice.density.is_some() {
            1.0
        } else {
            choice.beta.unwrap_or(1.0)
        },
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
