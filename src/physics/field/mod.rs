//! Peculiar-velocity fields in observer-centred Cartesian coordinates: gridded fields with
//! trilinear interpolation, linear-theory velocities from a gridded density contrast
//! (FFT, periodic or with δ = 0 outside the grid), analytic models (a uniform bulk flow plus spherical linear infall onto
//! named centres), and a combined flow model (β scaling, an external bulk flow V_ext and a
//! velocity dispersion σ_v).
//!
//! # Conventions
//!
//! * Positions are comoving, in the field's [`LengthUnit`] (Mpc or h⁻¹ Mpc), on the
//!   Cartesian axes named by [`FieldAxes`], with the observer at (0, 0, 0): a galaxy at
//!   distance d in direction n̂ sits at d·n̂ (see
//!   [`Direction::at_distance`](crate::physics::sky::Direction::at_distance)).
//! * Velocities are peculiar velocities at the present epoch (a = 1, z = 0), km/s, with
//!   components along the same axes.
//! * Grids are stored with x varying fastest: the value of cell (i, j, k) is element
//!   `i + n_x·(j + n_y·k)` ([`VelocityGrid::index`]), the order of a FITS image with
//!   NAXIS1 = n_x.
//!
//! Everything here is a pure function over numbers; reading and writing field files lives in
//! `crate::catalogue::field_io`.
//!
//! The parts: `grid` (gridded fields and their interpolation), `linear` (linear-theory
//! velocities from a gridded density), `analytic` (bulk flow plus infall centres) and
//! `model` (the combined flow model). The axes, the error type and the checks they share
//! are here.

use std::fmt;
use std::str::FromStr;

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};
use thiserror::Error;

use super::cosmology::{CosmologyParams, LengthUnit};
use super::sky::SkyRotations;

mod analytic;
mod grid;
mod linear;
mod model;

pub use analytic::{AnalyticField, InfallCentre};
pub use grid::{VelocityGrid, FACE_TOLERANCE_CELLS};
pub use linear::{velocity_from_density, velocity_from_density_isolated, DensityBoundary};
pub use model::FlowModel;

/// Cartesian axes of a field.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum FieldAxes {
    /// Supergalactic SGX, SGY, SGZ: x towards (SGL, SGB) = (0°, 0°), y towards (90°, 0°),
    /// z towards the supergalactic north pole (de Vaucouleurs et al. 1991, RC3; the frame of
    /// [`crate::physics::sky::Supergalactic`]).
    #[default]
    Supergalactic,
    /// Galactic X, Y, Z: x towards (l, b) = (0°, 0°), y towards (90°, 0°), z towards the
    /// north Galactic pole (the frame of [`crate::physics::sky::Galactic`]).
    Galactic,
}

impl FieldAxes {
    /// Lower-case name, as used in messages and settings.
    pub fn name(self) -> &'static str {
        match self {
            FieldAxes::Supergalactic => "supergalactic",
            FieldAxes::Galactic => "galactic",
        }
    }

    /// A Galactic Cartesian vector (position or velocity) expressed on these axes.
    pub fn from_galactic(self, rotations: &SkyRotations, v: [f64; 3]) -> [f64; 3] {
        match self {
            FieldAxes::Galactic => v,
            FieldAxes::Supergalactic => rotations.galactic_to_supergalactic.apply_vector(v),
        }
    }

    /// A vector on these axes expressed on Galactic axes (inverse of
    /// [`FieldAxes::from_galactic`]).
    pub fn to_galactic(self, rotations: &SkyRotations, v: [f64; 3]) -> [f64; 3] {
        match self {
            FieldAxes::Galactic => v,
            FieldAxes::Supergalactic => rotations
                .galactic_to_supergalactic
                .inverse()
                .apply_vector(v),
        }
    }
}

impl fmt::Display for FieldAxes {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for FieldAxes {
    type Err = String;
    /// `supergalactic`/`sg` or `galactic`/`gal`, any case.
    fn from_str(s: &str) -> Result<Self, String> {
        match s.trim().to_ascii_lowercase().as_str() {
            "supergalactic" | "sg" => Ok(FieldAxes::Supergalactic),
            "galactic" | "gal" => Ok(FieldAxes::Galactic),
            _ => Err(format!(
                "unknown field axes '{s}': use 'supergalactic' or 'galactic'"
            )),
        }
    }
}

/// The Hubble constant in km/s per field length unit: H0 for Mpc, 100 for h⁻¹ Mpc
/// (a length L in h⁻¹ Mpc is L/h Mpc, so H0·L/h = 100·L km/s).
pub fn hubble_per_length(params: &CosmologyParams, unit: LengthUnit) -> f64 {
    params.h0 / unit.from_mpc_factor(params)
}

/// What can be wrong with a field or a flow model.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum FieldError {
    #[error("{quantity} must be positive and finite, got {value}")]
    NotPositive { quantity: &'static str, value: f64 },
    #[error("{quantity} is not a finite number ({value})")]
    NotFinite { quantity: &'static str, value: f64 },
    #[error("grid shape {shape:?} is not usable: every axis needs at least one cell and the total must fit in memory")]
    BadShape { shape: [usize; 3] },
    #[error("velocity component {component} has {found} values but a {shape:?} grid has {expected} cells")]
    WrongLength {
        component: char,
        found: usize,
        expected: usize,
        shape: [usize; 3],
    },
    #[error("velocity component {component} is not finite ({value}) in cell ({i}, {j}, {k})")]
    NotFiniteVelocity {
        component: char,
        value: f64,
        i: usize,
        j: usize,
        k: usize,
    },
    #[error("the grid is on {grid_axes} axes in {grid_unit} but the analytic model on {analytic_axes} axes in {analytic_unit}")]
    Mismatch {
        grid_axes: FieldAxes,
        grid_unit: &'static str,
        analytic_axes: FieldAxes,
        analytic_unit: &'static str,
    },
}

fn positive(quantity: &'static str, value: f64) -> Result<(), FieldError> {
    if value.is_finite() && value > 0.0 {
        Ok(())
    } else {
        Err(FieldError::NotPositive { quantity, value })
    }
}

fn finite(quantity: &'static str, value: f64) -> Result<(), FieldError> {
    if value.is_finite() {
        Ok(())
    } else {
        Err(FieldError::NotFinite { quantity, value })
    }
}

/// Number of cells of a shape, if every axis is non-empty and the product fits.
fn cell_count(shape: [usize; 3]) -> Result<usize, FieldError> {
    if shape.contains(&0) {
        return Err(FieldError::BadShape { shape });
    }
    shape[0]
        .checked_mul(shape[1])
        .and_then(|n| n.checked_mul(shape[2]))
        .filter(|&n| n <= isize::MAX as usize / 8)
        .ok_or(FieldError::BadShape { shape })
}

const COMPONENTS: [char; 3] = ['x', 'y', 'z'];
#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn field_hubble_per_length_unit() {
        let p = CosmologyParams::flat_lcdm(70.0, 0.3);
        assert_eq!(hubble_per_length(&p, LengthUnit::Mpc), 70.0);
        assert!((hubble_per_length(&p, LengthUnit::MpcOverH) - 100.0).abs() < 1e-12);
    }

    #[test]
    fn field_axes_conversions_invert() {
        let rot = SkyRotations::default();
        let v = [120.0, -45.0, 300.0];
        for axes in [FieldAxes::Supergalactic, FieldAxes::Galactic] {
            let back = axes.to_galactic(&rot, axes.from_galactic(&rot, v));
            for c in 0..3 {
                assert!((back[c] - v[c]).abs() < 1e-10);
            }
            assert_eq!(axes.name().parse::<FieldAxes>().unwrap(), axes);
        }
        assert!("equatorial".parse::<FieldAxes>().is_err());
    }
}
