//! The plan of `galaxy`: one object's numbers parsed and checked, the shared settings
//! resolved.

use crate::physics::constants::C_KM_S;
use crate::physics::estimators::DistanceKind;
use crate::physics::redshift::{Heliocentric, Redshift};
use crate::physics::sky::{parse_dec_deg, parse_ra_deg};
use crate::settings::RunConfig;

use super::common::Shared;

/// What the user gave.
#[derive(Debug, Clone)]
pub struct GalaxyOrder {
    /// Degrees, or sexagesimal (RA in hours).
    pub ra: String,
    pub dec: String,
    pub z_helio: Option<f64>,
    /// c·z in km/s, instead of z_helio.
    pub cz_helio: Option<f64>,
    pub z_err: Option<f64>,
    pub distance_kind: DistanceKind,
    pub distance: f64,
    pub distance_err: Option<f64>,
    /// Cosmology, frames, conventions.
    pub flags: RunConfig,
}

/// A checked object.
#[derive(Debug, Clone)]
pub struct GalaxyPlan {
    pub ra_deg: f64,
    pub dec_deg: f64,
    pub z_helio: f64,
    pub z_err: Option<f64>,
    pub distance_kind: DistanceKind,
    pub distance: f64,
    pub distance_err: Option<f64>,
    pub shared: Shared,
}

impl GalaxyPlan {
    /// Whether any error was given (else the error outputs are left out).
    pub fn has_errors(&self) -> bool {
        self.z_err.is_some()
            || self.distance_err.is_some()
            || self.shared.config.conventions.sigma_star.is_some()
    }
}

/// Check the numbers, every problem at once.
pub fn plan_galaxy(order: GalaxyOrder) -> Result<GalaxyPlan, super::PlanError> {
    let mut problems = vec![];
    let ra = parse_ra_deg(&order.ra)
        .map_err(|e| problems.push(format!("--ra: {e}")))
        .unwrap_or(f64::NAN);
    let dec = parse_dec_deg(&order.dec)
        .map_err(|e| problems.push(format!("--dec: {e}")))
        .unwrap_or(f64::NAN);
    let z_helio = match (order.z_helio, order.cz_helio) {
        (Some(z), _) => z,
        (None, Some(cz)) => cz / C_KM_S,
        (None, None) => {
            problems.push("give --z-helio or --cz-helio".into());
            f64::NAN
        }
    };
    if order.z_helio.is_some() || order.cz_helio.is_some() {
        if let Err(e) = Redshift::<Heliocentric>::new(z_helio) {
            problems.push(format!("--z-helio: {e}"));
        }
    }
    let flag = format!("--{}", order.distance_kind.name());
    if !order.distance.is_finite() {
        problems.push(format!(
            "{flag}: {}",
            crate::physics::PhysicsError::NotFinite {
                quantity: "distance",
                value: order.distance
            }
        ));
    } else if matches!(
        order.distance_kind,
        DistanceKind::Dl | DistanceKind::Dc | DistanceKind::Da
    ) && order.distance <= 0.0
    {
        problems.push(format!(
            "{flag} must be a positive distance, got {}",
            order.distance
        ));
    }
    for (name, v) in [
        ("--z-err", order.z_err),
        ("distance error", order.distance_err),
        ("--sigma-star", order.flags.conventions.sigma_star),
    ] {
        if let Some(v) = v {
            if !(v.is_finite() && v >= 0.0) {
                problems.push(format!("{name} must be a non-negative number, got {v}"));
            }
        }
    }
    if !problems.is_empty() {
        return Err(problems.join("\n  ").into());
    }
    Ok(GalaxyPlan {
        ra_deg: ra,
        dec_deg: dec,
        z_helio,
        z_err: order.z_err,
        distance_kind: order.distance_kind,
        distance: order.distance,
        distance_err: order.distance_err,
        shared: Shared::resolve(None, None, &order.flags, false)?,
    })
}
