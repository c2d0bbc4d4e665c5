//! `galaxy`: one object through the same physics as a catalogue row, with the redshift in
//! the other rest frames for reference.

use crate::physics::estimators::Distance;
use crate::physics::object::{evaluate, ObjectInput, ObjectResult};
use crate::physics::redshift::{Heliocentric, Redshift};
use crate::physics::sky::{Direction, Icrs};
use crate::plan::galaxy::GalaxyPlan;

use super::cosmology_reaching;

/// Everything `galaxy` reports.
#[derive(Debug, Clone)]
pub struct GalaxyReport {
    pub result: ObjectResult,
    pub z_lg: f64,
    pub z_gsr: f64,
    pub z_lsr: f64,
    pub cautions: Vec<String>,
}

/// Derive the object's velocity.
pub fn run_galaxy(plan: &GalaxyPlan) -> Result<GalaxyReport, super::RunError> {
    let shared = &plan.shared;
    // One object costs nothing: reach well past its redshift, since its distance may imply a
    // cosmological redshift far from the observed one.
    let cosmology = cosmology_reaching(shared.cosmology.params, 2.0 + plan.z_helio)?;
    let length_unit = shared.config.conventions.length_unit.unwrap_or_default();
    let ctx = super::object_context(shared, &cosmology, length_unit);
    let input = ObjectInput {
        ra_deg: plan.ra_deg,
        dec_deg: plan.dec_deg,
        z_helio: plan.z_helio,
        z_err: plan.z_err.unwrap_or(0.0),
        distance: Distance {
            kind: plan.distance_kind,
            value: plan.distance,
            error: plan.distance_err.unwrap_or(0.0),
        },
    };
    let result =
        evaluate(&ctx, &input).map_err(|e| format!("cannot derive a peculiar velocity: {e}"))?;
    let gal = ctx.rotations.icrs_to_galactic.apply(
        &Direction::<Icrs>::from_lon_lat_deg(plan.ra_deg, plan.dec_deg)
            .map_err(|e| e.to_string())?,
    );
    let zh = Redshift::<Heliocentric>::new(plan.z_helio).map_err(|e| e.to_string())?;
    Ok(GalaxyReport {
        result,
        z_lg: shared
            .frames
            .local_group
            .from_heliocentric(zh, &gal)
            .value(),
        z_gsr: shared
            .frames
            .galactic_rest
            .from_heliocentric(zh, &gal)
            .value(),
        z_lsr: shared.frames.lsr.from_heliocentric(zh, &gal).value(),
        cautions: shared.cautions(),
    })
}
