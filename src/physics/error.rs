//! The one error type of the physics layer.

use thiserror::Error;

/// What can go wrong inside a physics calculation. Each variant says which quantity was
/// wrong and by how much, so the caller can attach file, column and row.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum PhysicsError {
    #[error("{quantity} is not a finite number ({value})")]
    NotFinite { quantity: &'static str, value: f64 },
    #[error("the distance has two cosmological redshifts, z = {lower} and z = {upper}, on either side of the maximum of the angular-diameter distance, and both imply a peculiar velocity below {bound_km_s} km/s")]
    TwoDistanceSolutions {
        lower: f64,
        upper: f64,
        bound_km_s: f64,
    },
    #[error("redshift {value} is not above -1 (1 + z must be positive)")]
    RedshiftNotAboveMinusOne { value: f64 },
    #[error("latitude {value}° is outside [-90°, 90°] ({quantity})")]
    LatitudeOutOfRange { quantity: &'static str, value: f64 },
    #[error("{quantity} must be positive, got {value}")]
    NotPositive { quantity: &'static str, value: f64 },
    #[error("speed {value} km/s is not below the speed of light")]
    FasterThanLight { value: f64 },
    #[error("cannot parse {quantity} '{text}': {reason}")]
    Unparseable {
        quantity: &'static str,
        text: String,
        reason: String,
    },
    #[error("invalid cosmology: {0}")]
    InvalidCosmology(String),
    #[error("E(z)² = {e2} ≤ 0 at z = {z}: this cosmology has no expanding solution there")]
    NoExpansion { z: f64, e2: f64 },
    #[error("redshift {z} is beyond the largest redshift this cosmology table covers ({z_max})")]
    BeyondTable { z: f64, z_max: f64 },
    #[error("distance {distance} Mpc is not reached by any redshift up to {z_max} in this cosmology ({what})")]
    DistanceOutOfReach {
        what: &'static str,
        distance: f64,
        z_max: f64,
    },
}
