//! The velocity-field model of `correct` (and of `mock --field`) as the user gives it: a
//! velocity grid, or a density grid turned into linear-theory velocities, and/or analytic
//! parts (a uniform flow, infall onto centres), scaled and shifted.

use serde::{Deserialize, Serialize};

use super::SettingsError;

use crate::physics::cosmology::LengthUnit;
use crate::physics::field::{DensityBoundary, FieldAxes};

/// Default residual velocity dispersion about a model, km/s (common practice).
pub const DEFAULT_SIGMA_V_KM_S: f64 = 250.0;

/// One infall centre: name, position (model axes and length unit), Δ0 and scale radius.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InfallChoice {
    pub name: String,
    pub position: [f64; 3],
    pub delta0: f64,
    pub r_scale: f64,
}

impl InfallChoice {
    /// The centre as the field model takes it.
    pub fn centre(&self) -> crate::physics::field::InfallCentre {
        crate::physics::field::InfallCentre {
            name: self.name.clone(),
            position: self.position,
            delta0: self.delta0,
            r_scale: self.r_scale,
        }
    }

    /// Parse `NAME,X,Y,Z,DELTA0,R_SCALE`.
    pub fn parse(s: &str) -> Result<InfallChoice, SettingsError> {
        let p: Vec<&str> = s.split(',').map(str::trim).collect();
        if p.len() != 6 {
            return Err(SettingsError::Infall {
                given: s.to_string(),
                problem: "expected NAME,X,Y,Z,DELTA0,R_SCALE".into(),
            });
        }
        let num = |i: usize| -> Result<f64, SettingsError> {
            p[i].parse::<f64>()
                .ok()
                .filter(|x| x.is_finite())
                .ok_or_else(|| SettingsError::Infall {
                    given: s.to_string(),
                    problem: format!("'{}' is not a finite number", p[i]),
                })
        };
        Ok(InfallChoice {
            name: p[0].to_string(),
            position: [num(1)?, num(2)?, num(3)?],
            delta0: num(4)?,
            r_scale: num(5)?,
        })
    }
}

/// A velocity model as the user gives it.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct ModelChoice {
    /// Velocity grid file (our FITS field file, or a table x, y, z, vx, vy, vz).
    pub field: Option<String>,
    /// Density-contrast grid file, turned into linear-theory velocities.
    pub density: Option<String>,
    /// Outside the density grid (default isolated: δ = 0 beyond it).
    pub density_boundary: Option<DensityBoundary>,
    /// Growth rate f for a density grid (default Ω_m^0.55).
    pub growth_rate: Option<f64>,
    /// Axes of the model's coordinates and vectors, when the file does not say (`--axes`;
    /// older records call it `field_axes`).
    #[serde(rename = "axes", alias = "field_axes")]
    pub field_axes: Option<FieldAxes>,
    /// Length unit of the model's coordinates, when the file does not say.
    pub field_unit: Option<LengthUnit>,
    /// Uniform flow, km/s, model axes (`--uniform-flow`; older records call it `bulk`).
    #[serde(rename = "uniform_flow", alias = "bulk")]
    pub bulk: Option<[f64; 3]>,
    /// Linear infall centres.
    pub infall: Vec<InfallChoice>,
    /// Scale of the model velocities (default 1).
    pub beta: Option<f64>,
    /// External dipole added to the model, km/s, model axes.
    pub external: Option<[f64; 3]>,
    /// Residual velocity dispersion about the model, km/s (default 250).
    pub sigma_v: Option<f64>,
}

impl ModelChoice {
    /// Whether any model part is given.
    pub fn is_empty(&self) -> bool {
        self.field.is_none()
            && self.density.is_none()
            && self.bulk.is_none()
            && self.infall.is_empty()
            && self.external.is_none()
    }
}
