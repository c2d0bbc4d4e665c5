//! `galaxy`: one object through the same physics as a catalogue row, with its redshift after
//! each boost of the chain Sun → LSR → Galactic rest → Local Group → CMB.

use crate::physics::estimators::Distance;
use crate::physics::object::{evaluate, ObjectInput, ObjectResult};
use crate::physics::redshift::{Heliocentric, Redshift};
use crate::physics::restframe::ChainStep;
use crate::physics::sky::{Direction, Icrs};
use crate::plan::galaxy::GalaxyPlan;

use serde_json::json;

use super::cosmology_reaching;

/// One boost of the chain with the object's redshift once it is applied.
#[derive(Debug, Clone)]
pub struct ChainRedshift {
    pub step: ChainStep,
    /// The redshift in the step's arrival frame: the exact boost from the Sun's frame by
    /// that frame's apex (for the CMB, the run's z_cmb, by the run's boost method).
    pub z: f64,
    /// cos θ between the object and the step's velocity (0 for a zero step).
    pub cos_theta: f64,
}

/// Everything `galaxy` reports.
#[derive(Debug, Clone)]
pub struct GalaxyReport {
    pub result: ObjectResult,
    /// Sun → LSR → Galactic rest → Local Group → CMB.
    pub chain: Vec<ChainRedshift>,
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
    let f = &shared.frames;
    let after = [
        f.lsr.from_heliocentric(zh, &gal).value(),
        f.galactic_rest.from_heliocentric(zh, &gal).value(),
        f.local_group.from_heliocentric(zh, &gal).value(),
        result.z_cmb,
    ];
    let [x, y, z] = gal.xyz();
    let chain = f
        .chain()
        .into_iter()
        .zip(after)
        .map(|(step, z_after)| {
            let [vx, vy, vz] = step.velocity_km_s;
            let cos_theta = if step.speed_km_s > 0.0 {
                (vx * x + vy * y + vz * z) / step.speed_km_s
            } else {
                0.0
            };
            ChainRedshift {
                step,
                z: z_after,
                cos_theta,
            }
        })
        .collect();
    Ok(GalaxyReport {
        result,
        chain,
        cautions: shared.cautions(),
    })
}

/// The object as `flowsift galaxy --json` prints it (and the Python package returns it).
pub fn galaxy_json(plan: &GalaxyPlan, report: &GalaxyReport) -> serde_json::Value {
    let r = &report.result;
    let (ra, dec, z_helio) = (plan.ra_deg, plan.dec_deg, plan.z_helio);
    let (kind, value, error) = (plan.distance_kind, plan.distance, plan.distance_err);
    let frames = &plan.shared.frames;
    let cosmo_choice = &plan.shared.cosmology;
    let convention = plan.shared.convention;
    let unit = plan
        .shared
        .config
        .conventions
        .length_unit
        .unwrap_or_default()
        .label();
    let has_errors = plan.has_errors();
    let notes = &report.cautions;
    let mut obj = json!({
        "ra": ra, "dec": dec,
        "glon": r.glon, "glat": r.glat, "sgl": r.sgl, "sgb": r.sgb,
        "sgx": r.sgx, "sgy": r.sgy, "sgz": r.sgz,
        "z_helio": z_helio,
        "z_cmb": r.z_cmb, "z_cos": r.z_cos, "z_pec": r.z_pec,
        "v_pec": r.v_pec,
        "d_c": r.d_c, "d_l": r.d_l, "eta": r.eta,
        "frame_chain": chain_json(&report.chain),
        "v_pec_low_z": r.v_pec_low_z,
        "v_pec_watkins_feldman": r.v_pec_watkins_feldman,
        "distance": {"kind": kind.name(), "value": value, "error": error},
        "length_unit": unit,
        "dl_convention": convention.name(),
        "boost": frames.method.name(),
        "cosmology": cosmo_choice,
        "cautions": notes,
    });
    if has_errors {
        let m = obj.as_object_mut().expect("object");
        m.insert("v_pec_err".into(), json!(r.v_pec_err));
        m.insert("eta_err".into(), json!(r.eta_err));
        m.insert("z_cos_err".into(), json!(r.z_cos_err));
    }
    obj
}

/// The chain as JSON: one object per boost, with the redshift once it is applied.
fn chain_json(chain: &[ChainRedshift]) -> serde_json::Value {
    serde_json::Value::Array(
        chain
            .iter()
            .map(|c| {
                json!({
                    "from": c.step.from,
                    "to": c.step.to,
                    "velocity_km_s": c.step.velocity_km_s,
                    "speed_km_s": c.step.speed_km_s,
                    "l_deg": c.step.l_deg,
                    "b_deg": c.step.b_deg,
                    "cos_theta": c.cos_theta,
                    "apex": c.step.apex,
                    "minus_apex": c.step.minus,
                    "z": c.z,
                })
            })
            .collect(),
    )
}
